// Evaluation by method name with options from JSON, and the JSON result.
#include <gtest/gtest.h>

#include "detection/evaluate.hpp"
#include "tests/detection/synthetic.hpp"

namespace veq::detection {
namespace {

Curve ramp() {
  const auto v = testing::fixed_steps(0.1, 4.0);
  std::vector<double> e;
  for (double x : v)
    e.push_back(x < 2.0 ? 10.0 * x : 20.0 + 1.0 * (x - 2.0));
  return testing::make_curve(v, e, SignalKind::absorbance, 0.0);
}

TEST(Evaluate, KnowsItsMethods) {
  ASSERT_EQ(method_names().size(), 5u);
  EXPECT_EQ(method_names()[0], "derivative");
  EXPECT_EQ(method_names()[1], "segments");
  EXPECT_EQ(method_names()[2], "crossing");
  EXPECT_EQ(method_names()[3], "gran");
  EXPECT_EQ(method_names()[4], "model");
}

TEST(Evaluate, DispatchesByName) {
  auto seg = evaluate(ramp(), "segments", {{"dilution_correction", false}});
  ASSERT_TRUE(seg) << seg.error().message;
  EXPECT_EQ(seg->method, "segments");
  ASSERT_EQ(seg->endpoints.size(), 1u);
  EXPECT_NEAR(seg->endpoints[0].volume_ml, 2.0, 1e-9);  // corner of the two lines

  auto cross = evaluate(ramp(), "crossing", {{"level", 15.0}});
  ASSERT_TRUE(cross);
  EXPECT_NEAR(cross->endpoints[0].volume_ml, 1.5, 1e-12);

  auto derivative = evaluate(ramp(), "derivative", nullptr);  // null = defaults
  ASSERT_TRUE(derivative) << derivative.error().message;
  EXPECT_EQ(derivative->options["window_points"], 5);
}

TEST(Evaluate, ErrorsNameTheProblem) {
  auto method = evaluate(ramp(), "steepest");
  ASSERT_FALSE(method);
  EXPECT_EQ(method.error().kind, ErrorKind::invalid_input);
  EXPECT_NE(method.error().message.find("'steepest'"), std::string::npos);
  EXPECT_NE(method.error().message.find("derivative, segments, crossing, gran, model"),
            std::string::npos);
  auto option = evaluate(ramp(), "derivative", {{"window", 5}});
  ASSERT_FALSE(option);
  EXPECT_NE(option.error().message.find("'window'"), std::string::npos);
  EXPECT_FALSE(evaluate(ramp(), "crossing"));                           // level missing
  EXPECT_FALSE(evaluate(ramp(), "segments", nlohmann::json::array()));  // not an object
}

TEST(Evaluate, JsonResultHasTheAgreedShape) {
  auto ev = evaluate(ramp(), "crossing", {{"level", 15.0}});
  ASSERT_TRUE(ev);
  const nlohmann::json j = to_json(*ev);
  ASSERT_EQ(j["endpoints"].size(), 1u);
  const auto& e = j["endpoints"][0];
  EXPECT_NEAR(e["volume_ml"].get<double>(), 1.5, 1e-12);
  EXPECT_TRUE(e.contains("uncertainty_ml"));
  EXPECT_DOUBLE_EQ(e["signal"].get<double>(), 15.0);
  EXPECT_EQ(e["method"], "crossing");
  EXPECT_EQ(j["method"], "crossing");
  EXPECT_EQ(j["options"]["level"], 15.0);
  EXPECT_TRUE(j["flags"].is_array());
  EXPECT_TRUE(j["diagnostics"]["markers"].is_array());
}

TEST(QualityFlags, StoredValuesAndNamesAreFixed) {
  // Stored in SQLite: the numbers must never change.
  EXPECT_EQ(static_cast<int>(QualityFlag::few_points_after_endpoint), 1);
  EXPECT_EQ(static_cast<int>(QualityFlag::small_break), 2);
  EXPECT_EQ(static_cast<int>(QualityFlag::near_curve_end), 3);
  EXPECT_EQ(static_cast<int>(QualityFlag::poor_linearity), 4);
  EXPECT_EQ(static_cast<int>(QualityFlag::no_endpoint), 5);
  EXPECT_EQ(static_cast<int>(QualityFlag::break_incomplete), 6);
  EXPECT_EQ(static_cast<int>(QualityFlag::spikes_removed), 7);
  EXPECT_EQ(static_cast<int>(QualityFlag::coarse_steps), 8);
  EXPECT_EQ(static_cast<int>(QualityFlag::several_crossings), 9);
  EXPECT_EQ(static_cast<int>(QualityFlag::few_points_in_segment), 10);
  EXPECT_EQ(static_cast<int>(QualityFlag::weak_angle), 11);
  EXPECT_EQ(static_cast<int>(QualityFlag::signal_out_of_range), 12);
  EXPECT_EQ(static_cast<int>(QualityFlag::dilution_not_corrected), 13);
  EXPECT_EQ(static_cast<int>(QualityFlag::sides_disagree), 14);
  EXPECT_EQ(static_cast<int>(QualityFlag::metal_fraction_not_corrected), 15);
  EXPECT_EQ(static_cast<int>(QualityFlag::poor_fit), 16);
  EXPECT_EQ(static_cast<int>(QualityFlag::fit_not_converged), 17);
  EXPECT_EQ(static_cast<int>(QualityFlag::parameter_at_limit), 18);
  EXPECT_EQ(static_cast<int>(QualityFlag::unusual_slope), 19);
  EXPECT_STREQ(quality_flag_name(QualityFlag::break_incomplete), "break_incomplete");
  EXPECT_STREQ(quality_flag_name(QualityFlag::dilution_not_corrected), "dilution_not_corrected");
  EXPECT_STREQ(quality_flag_name(QualityFlag::metal_fraction_not_corrected),
               "metal_fraction_not_corrected");
  EXPECT_STREQ(quality_flag_name(QualityFlag::unusual_slope), "unusual_slope");
}

}  // namespace
}  // namespace veq::detection
