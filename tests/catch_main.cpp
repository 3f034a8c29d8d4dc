// Catch2 v2 main, compiled once and linked into every test program.
#define CATCH_CONFIG_MAIN
#include <catch2/catch.hpp>
