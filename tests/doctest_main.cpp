// doctest_main.cpp — the one main() shared by every unit-test program.
#define DOCTEST_CONFIG_IMPLEMENT_WITH_MAIN
#include <doctest/doctest.h>
