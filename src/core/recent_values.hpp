// The last few values a thread made, kept by the arguments that made them, newest first: a value
// asked for again is copied out instead of made anew (spectrum/window's windows and QIFFT
// tables). A linear search over at most N keys; Key needs ==.
#pragma once

#include <algorithm>
#include <cstddef>
#include <vector>

namespace wane {

template <class Key, class Value, std::size_t N>
class recent_values {
public:
    /// The value kept for key, else make()'s, kept (the oldest dropped past N).
    template <class Make>
    const Value& get(const Key& key, Make&& make) {
        const auto hit = std::find_if(items_.begin(), items_.end(), [&](const item& m) { return m.key == key; });
        if (hit != items_.end()) {
            std::rotate(items_.begin(), hit, hit + 1);  // newest first
            return items_.front().value;
        }
        if (items_.size() == N) items_.pop_back();
        items_.insert(items_.begin(), item{.key = key, .value = make()});
        return items_.front().value;
    }

private:
    struct item {
        Key key;
        Value value;
    };
    std::vector<item> items_;
};

}  // namespace wane
