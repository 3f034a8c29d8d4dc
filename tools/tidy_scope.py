#!/usr/bin/env python3
"""Which sources clang-tidy must look at again since a commit where all of them were clean: the .cpp
files under src/, tests/unit/ and tools/ (SOURCE_DIRS).

    tools/tidy_scope.py BASE_COMMIT      prints one path per line (relative to the repository)

A file is listed when it changed since BASE_COMMIT (committed or not, or is new) or when any file it
includes with a quoted #include (followed through src/, transitively) changed. Every file is listed
when the answer cannot be narrowed safely: BASE_COMMIT unknown or not an ancestor of HEAD (a shallow
clone), or a change to what decides the checks or the compile flags (.clang-tidy, a CMakeLists.txt,
tools/tidy, this script). System headers are not followed: a new compiler or library is a new CI
image, and tools/tidy with no argument checks everything.
"""
import os
import re
import subprocess
import sys

INCLUDE = re.compile(r'^\s*#\s*include\s+"([^"]+)"', re.M)
RULE_FILES = ('.clang-tidy', 'tools/tidy', 'tools/tidy_scope.py')


def git(*args):
    return subprocess.run(['git', *args], capture_output=True, text=True, check=False)


SOURCE_DIRS = ('src', os.path.join('tests', 'unit'), 'tools')


def all_sources():
    out = []
    for top in SOURCE_DIRS:
        for root, _, names in os.walk(top):
            out += [os.path.join(root, n) for n in names if n.endswith('.cpp')]
    return sorted(out)


def changed_since(base):
    """Paths changed between base and the working tree, plus untracked files; None if unknown."""
    if git('cat-file', '-e', base + '^{commit}').returncode != 0:
        return None
    if git('merge-base', '--is-ancestor', base, 'HEAD').returncode != 0:
        return None
    diff = git('diff', '--name-only', base, '--')
    untracked = git('ls-files', '--others', '--exclude-standard')
    if diff.returncode != 0 or untracked.returncode != 0:
        return None
    return set(diff.stdout.split()) | set(untracked.stdout.split())


def includes_of(path):
    """Quoted includes of one file, resolved beside it or under src/ (as the build's -Isrc does)."""
    try:
        text = open(path, encoding='utf-8', errors='replace').read()
    except OSError:
        return []
    found = []
    for name in INCLUDE.findall(text):
        for candidate in (os.path.join(os.path.dirname(path), name), os.path.join('src', name)):
            if os.path.isfile(candidate):
                found.append(os.path.normpath(candidate))
                break
    return found


def closure(path, memo):
    if path in memo:
        return memo[path]
    memo[path] = {path}  # a cycle ends here
    seen = {path}
    for inc in includes_of(path):
        seen |= closure(inc, memo)
    memo[path] = seen
    return seen


def main():
    if len(sys.argv) != 2:
        sys.exit('usage: tools/tidy_scope.py BASE_COMMIT')
    os.chdir(subprocess.run(['git', 'rev-parse', '--show-toplevel'], capture_output=True, text=True,
                            check=True).stdout.strip())
    sources = all_sources()
    changed = changed_since(sys.argv[1])
    if changed is None or any(p in RULE_FILES or os.path.basename(p) == 'CMakeLists.txt' for p in changed):
        print('\n'.join(sources))
        return
    changed = {os.path.normpath(p) for p in changed}
    memo = {}
    scope = [s for s in sources if closure(s, memo) & changed]
    if scope:
        print('\n'.join(scope))


if __name__ == '__main__':
    main()
