// The solver's Newton loop must not allocate (benchmarks rely on it, and a
// controller may call it in a tight loop). Global operator new is replaced in
// this test program to count allocations while a flag is set.
// The replacements pair malloc with free on purpose; g++ cannot see that the
// operator new it pairs with is the one below and warns about every delete.
#pragma GCC diagnostic ignored "-Wmismatched-new-delete"

#include <gtest/gtest.h>

#include <atomic>
#include <cstdlib>
#include <new>

#include "chemistry/constants.hpp"
#include "chemistry/equilibrium.hpp"

namespace {
std::atomic<bool> counting{false};
std::atomic<long> allocations{0};
}  // namespace

// AddressSanitizer owns operator new in a sanitizer build; replacing it there
// mixes allocators. The count is taken in the ordinary build. g++ says
// __SANITIZE_ADDRESS__; clang 14 says only __has_feature(address_sanitizer).
#if defined(__SANITIZE_ADDRESS__)
#define VEQ_ADDRESS_SANITIZER 1
#elif defined(__has_feature)
#if __has_feature(address_sanitizer)
#define VEQ_ADDRESS_SANITIZER 1
#endif
#endif
#ifndef VEQ_ADDRESS_SANITIZER
#define VEQ_COUNT_ALLOCATIONS 1

void* operator new(std::size_t size) {
  if (counting.load(std::memory_order_relaxed))
    allocations.fetch_add(1);
  if (void* p = std::malloc(size == 0 ? 1 : size))
    return p;
  throw std::bad_alloc();
}
void* operator new[](std::size_t size) {
  return operator new(size);
}
void operator delete(void* p) noexcept {
  std::free(p);
}
void operator delete[](void* p) noexcept {
  std::free(p);
}
void operator delete(void* p, std::size_t) noexcept {
  std::free(p);
}
void operator delete[](void* p, std::size_t) noexcept {
  std::free(p);
}
#endif

namespace veq::chemistry {
namespace {

TEST(EquilibriumSolver, SolvingDoesNotAllocateOnceSized) {
#ifndef VEQ_COUNT_ALLOCATIONS
  GTEST_SKIP() << "allocations are counted only without AddressSanitizer";
#endif
  auto lib = builtin_constants_library();
  ASSERT_TRUE(lib.has_value());
  SystemRecipe recipe;
  recipe.metals = {"Zn"};
  recipe.ligands = {"EDTA", "ammonia"};
  auto system = build_system(*lib, recipe);
  ASSERT_TRUE(system.has_value());
  auto solver = EquilibriumSolver::create(*system);
  ASSERT_TRUE(solver.has_value());
  Conditions c;
  c.ph = 10.0;
  c.total_mol_per_l = {0.0, 1e-3, 0.0, 0.1};
  Speciation a, b;
  ASSERT_TRUE(solver->solve(c, a).has_value());  // sizes the output once
  b = a;
  counting = true;
  for (int k = 1; k <= 200; ++k) {
    c.total_mol_per_l[2] = 2e-3 * k / 200.0;
    auto r = (k % 2 == 0) ? solver->solve_from(c, a, b) : solver->solve(c, b);
    if (!r)
      break;
    std::swap(a, b);
  }
  counting = false;
  EXPECT_EQ(allocations.load(), 0);
}

}  // namespace
}  // namespace veq::chemistry
