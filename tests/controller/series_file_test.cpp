// The series file: round trip and errors that name the line and the field.
#include <gtest/gtest.h>

#include "controller/series/series_file.hpp"
#include "tests/controller/series_bench.hpp"

namespace veq::series {
namespace {

TEST(SeriesFile, RoundTrip) {
  auto s = parse_series(testing::kSeries, "test series");
  ASSERT_TRUE(s.has_value()) << s.error().message;
  EXPECT_EQ(s->entries.size(), 8u);
  auto again = parse_series(write_series(*s), "written");
  ASSERT_TRUE(again.has_value()) << again.error().message;
  EXPECT_EQ(*again, *s);
}

}  // namespace
}  // namespace veq::series
