// Titers: acceptance from three or more determinations within an RSD limit
// (statistics checked against a hand computation), expiry, and a method's
// refusal of an expired titer or calibration.
#include <gtest/gtest.h>

#include <cmath>

#include "controller/method/method_file.hpp"
#include "controller/method/readiness.hpp"
#include "controller/method/titer.hpp"

namespace veq::method {
namespace {

TimePoint at(const char* text) {
  return parse_utc(text).value();
}

TEST(UtcTime, FormatsAndParsesBack) {
  const TimePoint t = at("2026-12-02T01:48:22.123Z");
  EXPECT_EQ(format_utc(t), "2026-12-02T01:48:22.123Z");
  EXPECT_EQ(format_utc(at("2024-02-29T23:59:59Z")), "2024-02-29T23:59:59.000Z");
  // 2026-12-02 is day 20789 after 1970-01-01 (date arithmetic by hand:
  // 56 years with 14 leap days = 20454 days, then 335 days to 2 December).
  EXPECT_EQ(std::chrono::floor<std::chrono::days>(t).time_since_epoch().count(), 20789);
  for (const char* bad : {"2026-13-02T01:48:22Z", "2026-12-02 01:48:22Z", "2026-02-30T00:00:00Z",
                          "2026-12-02T01:48:22", "yesterday", "2026-12-02T01:48:22.1Z"}) {
    EXPECT_FALSE(parse_utc(bad).has_value()) << bad;
  }
}

store::TitrantRecord edta() {
  return store::TitrantRecord{"EDTA 0.01 mol/L", 0.01, "lot 7", "2026-11-20T09:00:00.000Z"};
}

TEST(Titer, ThreeCloseDeterminationsAreAccepted) {
  // By hand: mean = 0.030039 / 3 = 0.010013 mol/L; deviations -1, +5, -4 (x1e-6);
  // squares sum 42e-12, / (n - 1) = 21e-12, sd = 4.5826e-6 mol/L,
  // RSD = 4.5826e-6 / 0.010013 = 0.04577 %.
  const std::vector<double> values = {0.010012, 0.010018, 0.010009};
  auto stats = titer_statistics(values);
  ASSERT_TRUE(stats.has_value());
  EXPECT_NEAR(stats->mean_mol_per_l, 0.010013, 1e-12);
  EXPECT_NEAR(stats->sd_mol_per_l, 4.5826e-6, 1e-9);
  EXPECT_NEAR(stats->rsd_percent, 0.04577, 1e-4);
  const auto record = judge_titer(edta(), values, at("2026-12-01T08:00:00Z"));
  EXPECT_TRUE(record.accepted) << record.note;
  EXPECT_EQ(record.lot, "lot 7");
  EXPECT_EQ(record.expires_utc, "2026-12-08T08:00:00.000Z");  // 7 days, the default
}

TEST(Titer, ScatteredDeterminationsAreRefused) {
  // By hand: mean 0.0100, deviations 0, +5e-5, -5e-5; sd = sqrt(5e-9 / 2) = 5e-5;
  // RSD = 0.5 %, above the 0.2 % limit (common practice).
  const std::vector<double> values = {0.01000, 0.01005, 0.00995};
  auto stats = titer_statistics(values);
  ASSERT_TRUE(stats.has_value());
  EXPECT_NEAR(stats->rsd_percent, 0.5, 1e-9);
  const auto record = judge_titer(edta(), values, at("2026-12-01T08:00:00Z"));
  EXPECT_FALSE(record.accepted);
  EXPECT_NE(record.note.find("exceeds the limit of 0.2 %"), std::string::npos) << record.note;
  // The same values pass a laxer limit of the lab's own.
  TiterOptions lax;
  lax.largest_rsd_percent = 0.6;
  EXPECT_TRUE(judge_titer(edta(), values, at("2026-12-01T08:00:00Z"), lax).accepted);
}

TEST(Titer, TwoDeterminationsAreNotEnough) {
  const auto record = judge_titer(edta(), {0.010012, 0.010013}, at("2026-12-01T08:00:00Z"));
  EXPECT_FALSE(record.accepted);
  EXPECT_NE(record.note.find("at least 3 needed"), std::string::npos) << record.note;
  EXPECT_FALSE(judge_titer(edta(), {0.01, -0.01, 0.01}, at("2026-12-01T08:00:00Z")).accepted);
}

TEST(Titer, ValidUntilItExpires) {
  const auto record =
      judge_titer(edta(), {0.010012, 0.010018, 0.010009}, at("2026-12-01T08:00:00Z"));
  EXPECT_FALSE(titer_valid_at(record, at("2026-12-01T07:59:59Z")));  // not yet determined
  EXPECT_TRUE(titer_valid_at(record, at("2026-12-01T08:00:00Z")));
  EXPECT_TRUE(titer_valid_at(record, at("2026-12-08T07:59:59.999Z")));
  EXPECT_FALSE(titer_valid_at(record, at("2026-12-08T08:00:00Z")));
}

TEST(Titer, LatestAcceptedTiterOfTheCurrentLot) {
  auto older = judge_titer(edta(), {0.0100, 0.0100, 0.0100}, at("2026-11-25T08:00:00Z"));
  auto newer = judge_titer(edta(), {0.0101, 0.0101, 0.0101}, at("2026-11-28T08:00:00Z"));
  auto refused = judge_titer(edta(), {0.0100, 0.0105, 0.0095}, at("2026-11-30T08:00:00Z"));
  auto other_lot = newer;
  other_lot.lot = "lot 8";
  other_lot.determined_utc = "2026-11-29T08:00:00.000Z";
  const std::vector<store::TiterRecord> all = {older, newer, refused, other_lot};
  auto found = latest_accepted_titer(all, "EDTA 0.01 mol/L", "lot 7", at("2026-12-01T00:00:00Z"));
  ASSERT_TRUE(found.has_value());
  EXPECT_EQ(found->determined_utc, "2026-11-28T08:00:00.000Z");
  // Asked about a time before the newer one, the older one answers.
  found = latest_accepted_titer(all, "EDTA 0.01 mol/L", "lot 7", at("2026-11-27T00:00:00Z"));
  ASSERT_TRUE(found.has_value());
  EXPECT_EQ(found->determined_utc, "2026-11-25T08:00:00.000Z");
}

Method hardness_method() {
  return read_method_file(std::string(VEQ_SOURCE_DIR) + "/docs/examples/tap-water-hardness.method")
      .value();
}

store::CalibrationRecord calibration(const char* measured, const char* expires, bool accepted) {
  store::CalibrationRecord c;
  c.electrode = "divalent cation electrode 1";
  c.slope_mv_per_decade = 28.9;
  c.e0_mv = 112.0;
  c.temperature_c = 25.0;
  c.accepted = accepted;
  c.measured_utc = measured;
  c.expires_utc = expires;
  return c;
}

TEST(Readiness, ReadyWithAValidTiterAndCalibration) {
  const auto titer =
      judge_titer(edta(), {0.010012, 0.010018, 0.010009}, at("2026-12-01T08:00:00Z"));
  const auto cal = calibration("2026-12-01T07:00:00.000Z", "2026-12-02T07:00:00.000Z", true);
  auto ready = check_ready(hardness_method(), {edta()}, {titer}, {cal}, at("2026-12-01T12:00:00Z"));
  ASSERT_TRUE(ready.has_value()) << ready.error().message;
  ASSERT_EQ(ready->titers.size(), 1u);
  EXPECT_NEAR(ready->titers[0].conc_mol_per_l, 0.010013, 1e-12);
  EXPECT_EQ(ready->titers[0].burette, "burette 1");
  ASSERT_TRUE(ready->calibration.has_value());
  EXPECT_DOUBLE_EQ(ready->calibration->slope_mv_per_decade, 28.9);
}

TEST(Readiness, RefusesAnExpiredTiterAndCalibrationSayingSinceWhen) {
  const auto titer =
      judge_titer(edta(), {0.010012, 0.010018, 0.010009}, at("2026-12-01T08:00:00Z"));
  const auto cal = calibration("2026-12-01T07:00:00.000Z", "2026-12-02T07:00:00.000Z", true);
  auto ready = check_ready(hardness_method(), {edta()}, {titer}, {cal}, at("2026-12-09T12:00:00Z"));
  ASSERT_FALSE(ready.has_value());
  const std::string& m = ready.error().message;
  EXPECT_NE(m.find("titer of 'EDTA 0.01 mol/L' expired at 2026-12-08T08:00:00.000Z"),
            std::string::npos)
      << m;
  EXPECT_NE(m.find("calibration of electrode 'divalent cation electrode 1' expired at "
                   "2026-12-02T07:00:00.000Z"),
            std::string::npos)
      << m;
}

TEST(Readiness, RefusesWhatIsMissingOrRefused) {
  const auto refused = judge_titer(edta(), {0.0100, 0.0105, 0.0095}, at("2026-12-01T08:00:00Z"));
  const auto cal = calibration("2026-12-01T07:00:00.000Z", "2026-12-02T07:00:00.000Z", false);
  auto ready =
      check_ready(hardness_method(), {edta()}, {refused}, {cal}, at("2026-12-01T12:00:00Z"));
  ASSERT_FALSE(ready.has_value());
  EXPECT_NE(ready.error().message.find("has no accepted titer"), std::string::npos);
  EXPECT_NE(ready.error().message.find("has no accepted calibration"), std::string::npos);
  ready = check_ready(hardness_method(), {}, {}, {}, at("2026-12-01T12:00:00Z"));
  ASSERT_FALSE(ready.has_value());
  EXPECT_NE(ready.error().message.find("titrant 'EDTA 0.01 mol/L' is not registered"),
            std::string::npos);
}

TEST(Readiness, ATiterOfAnOldLotDoesNotCount) {
  const auto titer =
      judge_titer(edta(), {0.010012, 0.010018, 0.010009}, at("2026-12-01T08:00:00Z"));
  auto new_lot = edta();
  new_lot.lot = "lot 8";
  const auto cal = calibration("2026-12-01T07:00:00.000Z", "2026-12-02T07:00:00.000Z", true);
  auto ready =
      check_ready(hardness_method(), {new_lot}, {titer}, {cal}, at("2026-12-01T12:00:00Z"));
  ASSERT_FALSE(ready.has_value());
  EXPECT_NE(ready.error().message.find("(lot 'lot 8') has no accepted titer"), std::string::npos)
      << ready.error().message;
}

}  // namespace
}  // namespace veq::method
