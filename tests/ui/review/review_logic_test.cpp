// The Qt-free rules of the review views: control limits, expiry, run filters,
// the line of a method-file error.
#include <gtest/gtest.h>

#include <chrono>
#include <cmath>

#include "ui/review/review_logic.hpp"

namespace veq::ui::review {
namespace {

TEST(ControlLimits, MeanAndSampleStandardDeviation) {
  // 1..5: mean 3, sample standard deviation sqrt(10 / 4) = 1.5811388
  // (numpy.std([1, 2, 3, 4, 5], ddof=1) gives 1.5811388300841898).
  auto limits = control_limits({1.0, 2.0, 3.0, 4.0, 5.0});
  ASSERT_TRUE(limits.has_value()) << limits.error().message;
  EXPECT_EQ(limits->count, 5);
  EXPECT_NEAR(limits->mean, 3.0, 1e-12);
  EXPECT_NEAR(limits->sd, 1.5811388300841898, 1e-12);
  EXPECT_NEAR(limits->upper_warning, 3.0 + 2.0 * 1.5811388300841898, 1e-12);
  EXPECT_NEAR(limits->lower_action, 3.0 - 3.0 * 1.5811388300841898, 1e-12);
  // Warning at 2 s, action at 3 s (ISO 7870-2 as laboratories use it: common practice).
  EXPECT_EQ(control_verdict(*limits, 3.0 + 1.9 * limits->sd), ControlVerdict::within);
  EXPECT_EQ(control_verdict(*limits, 3.0 - 2.1 * limits->sd), ControlVerdict::warning);
  EXPECT_EQ(control_verdict(*limits, 3.0 + 3.1 * limits->sd), ControlVerdict::action);
}

TEST(ControlLimits, TooFewValuesAreRefusedWithTheCount) {
  auto limits = control_limits({1.0, NAN, 2.0});
  ASSERT_FALSE(limits.has_value());
  EXPECT_NE(limits.error().message.find("2 given"), std::string::npos) << limits.error().message;
}

TEST(Expiry, ExpiredValidSoonAndRefusedAreSaidInWords) {
  auto now = method::parse_utc("2026-12-02T12:00:00Z");
  ASSERT_TRUE(now.has_value());
  auto expired = expiry_status(true, "2026-11-30T12:00:00.000Z", *now);
  EXPECT_EQ(expired.state, Freshness::expired);
  EXPECT_EQ(expired.text, "EXPIRED 2 days ago (2026-11-30 12:00 UTC)");
  auto soon = expiry_status(true, "2026-12-02T18:00:00.000Z", *now);
  EXPECT_EQ(soon.state, Freshness::expires_soon);
  EXPECT_EQ(soon.text, "expires in 6 hours (2026-12-02 18:00 UTC)");
  auto valid = expiry_status(true, "2026-12-09T12:00:00.000Z", *now);
  EXPECT_EQ(valid.state, Freshness::valid);
  EXPECT_EQ(valid.text, "valid for 7 days (2026-12-09 12:00 UTC)");
  EXPECT_EQ(expiry_status(false, "2026-12-09T12:00:00.000Z", *now).state, Freshness::refused);
  // A date nobody can read must not pass as valid.
  auto unreadable = expiry_status(true, "next tuesday", *now);
  EXPECT_EQ(unreadable.state, Freshness::expired);
  EXPECT_NE(unreadable.text.find("next tuesday"), std::string::npos);
}

TEST(RunFilter, DaysMethodStatusAndText) {
  store::RunRecord run;
  run.started_utc = "2026-12-02T08:15:00.000Z";
  run.status = store::RunStatus::completed;
  run.run.sample_id = "Millrace well";
  run.run.method_name = "calcium in drinking water";
  EXPECT_TRUE(run_matches(run, {}));
  EXPECT_TRUE(run_matches(run, {"2026-12-02", "2026-12-02", "", std::nullopt, ""}));
  EXPECT_FALSE(run_matches(run, {"2026-12-03", "", "", std::nullopt, ""}));
  EXPECT_FALSE(run_matches(run, {"", "2026-12-01", "", std::nullopt, ""}));
  EXPECT_TRUE(run_matches(run, {"", "", "calcium in drinking water", std::nullopt, ""}));
  EXPECT_FALSE(run_matches(run, {"", "", "nickel", std::nullopt, ""}));
  EXPECT_FALSE(run_matches(run, {"", "", "", store::RunStatus::failed, ""}));
  EXPECT_TRUE(run_matches(run, {"", "", "", std::nullopt, "MILLRACE"}));
  EXPECT_FALSE(run_matches(run, {"", "", "", std::nullopt, "spring"}));
}

TEST(MethodErrors, LineNumberIsReadFromTheParsersMessage) {
  EXPECT_EQ(error_line("method text: line 12, field 'unit': unknown unit"), 12);
  EXPECT_FALSE(error_line("method text: no [method] section").has_value());
  EXPECT_EQ(readable_utc("2026-12-02T01:48:22.123Z"), "2026-12-02 01:48 UTC");
}

}  // namespace
}  // namespace veq::ui::review
