// Whole series in virtual time on a simulated rack: every entry kind, the
// rules for bad results, and the stopping failures.
#include <gtest/gtest.h>

#include <cmath>
#include <cstdio>

#include "tests/controller/series_bench.hpp"

namespace veq::series {
namespace {

using testing::SeriesBench;

class Printer final : public SeriesObserver {
 public:
  void on_message(const std::string& text) override { std::printf("    %s\n", text.c_str()); }
  void on_entry_end(const std::string& label, const std::string& status,
                    const std::string& note) override {
    std::printf("  entry '%s': %s %s\n", label.c_str(), status.c_str(), note.c_str());
  }
};

TEST(Series, EveryEntryKindRunsAndTiterAndBlankBringTheResultsToTheTruth) {
  SeriesBench b;
  b.prepare_lab();
  Printer printer;
  auto outcome = b.run(testing::kSeries, &printer);
  std::printf("status %s: %s\n", store::series_status_name(outcome.status), outcome.reason.c_str());
  for (const auto& e : outcome.entries) {
    std::printf("%-16s %-16s %-8s mean %.6g %s (%zu values)\n", entry_kind_name(e.kind),
                e.label.c_str(), e.status.c_str(), e.mean.value_or(NAN), e.unit.c_str(),
                e.values.size());
  }
  EXPECT_EQ(outcome.status, store::SeriesStatus::completed) << outcome.reason;
}

}  // namespace
}  // namespace veq::series
