// Validation of curves built from outside data: every kind of bad input gets
// an error naming the problem and the row.
#include <gtest/gtest.h>

#include <cmath>
#include <limits>

#include "detection/curve.hpp"

namespace veq::detection {
namespace {

CurveColumns columns(std::vector<double> v, std::vector<double> s) {
  CurveColumns c;
  c.volume_ml = std::move(v);
  c.signal = std::move(s);
  return c;
}

TEST(SignalKind, NamesRoundTripAndStoredValuesAreFixed) {
  // Stored in SQLite: these numbers must never change.
  EXPECT_EQ(static_cast<int>(SignalKind::potential_mv), 1);
  EXPECT_EQ(static_cast<int>(SignalKind::p_metal), 2);
  EXPECT_EQ(static_cast<int>(SignalKind::ph), 3);
  EXPECT_EQ(static_cast<int>(SignalKind::absorbance), 4);
  EXPECT_EQ(static_cast<int>(SignalKind::transmittance), 5);
  for (SignalKind k : {SignalKind::potential_mv, SignalKind::p_metal, SignalKind::ph,
                       SignalKind::absorbance, SignalKind::transmittance}) {
    EXPECT_EQ(signal_kind_from_name(signal_kind_name(k)), k);
  }
  EXPECT_STREQ(signal_kind_name(SignalKind::potential_mv), "potential_mv");
  EXPECT_FALSE(signal_kind_from_name("Potential").has_value());
  EXPECT_FALSE(signal_kind_from_name("").has_value());
}

TEST(Curve, KeepsValidColumns) {
  CurveColumns c = columns({0.0, 0.5, 1.0, 1.5}, {10.0, 11.0, 13.0, 20.0});
  c.time_s = {0.0, 5.0, 10.0, 15.0};
  c.kind = SignalKind::ph;
  c.sample_volume_ml = 25.0;
  auto curve = Curve::from_columns(c);
  ASSERT_TRUE(curve) << curve.error().message;
  EXPECT_EQ(curve->size(), 4u);
  EXPECT_EQ(curve->volume_ml(), c.volume_ml);
  EXPECT_EQ(curve->signal(), c.signal);
  EXPECT_EQ(curve->time_s(), c.time_s);
  EXPECT_TRUE(curve->temperature_c().empty());
  EXPECT_EQ(curve->kind(), SignalKind::ph);
  EXPECT_DOUBLE_EQ(curve->sample_volume_ml(), 25.0);
}

TEST(Curve, MergesEqualVolumesByAveraging) {
  CurveColumns c = columns({0.0, 0.5, 0.5, 0.5, 1.0}, {1.0, 2.0, 4.0, 6.0, 9.0});
  c.time_s = {0.0, 1.0, 2.0, 3.0, 4.0};
  c.temperature_c = {25.0, 25.0, 25.3, 25.6, 25.0};
  auto curve = Curve::from_columns(c);
  ASSERT_TRUE(curve);
  EXPECT_EQ(curve->volume_ml(), (std::vector<double>{0.0, 0.5, 1.0}));
  EXPECT_EQ(curve->signal(), (std::vector<double>{1.0, 4.0, 9.0}));
  EXPECT_EQ(curve->time_s(), (std::vector<double>{0.0, 2.0, 4.0}));
  EXPECT_NEAR(curve->temperature_c()[1], 25.3, 1e-12);
}

TEST(Curve, VolumeGoingBackwardsNamesTheRow) {
  auto curve = Curve::from_columns(columns({0.0, 0.5, 1.0, 0.9, 1.2}, {1, 2, 3, 4, 5}));
  ASSERT_FALSE(curve);
  EXPECT_EQ(curve.error().kind, ErrorKind::invalid_input);
  EXPECT_NE(curve.error().message.find("row 4"), std::string::npos) << curve.error().message;
  EXPECT_NE(curve.error().message.find("backwards"), std::string::npos);
}

TEST(Curve, NonFiniteValuesNameRowAndColumn) {
  const double nan = std::numeric_limits<double>::quiet_NaN();
  const double inf = std::numeric_limits<double>::infinity();
  auto a = Curve::from_columns(columns({0.0, 0.5, 1.0, 1.5}, {1, 2, nan, 4}));
  ASSERT_FALSE(a);
  EXPECT_NE(a.error().message.find("row 3"), std::string::npos) << a.error().message;
  EXPECT_NE(a.error().message.find("'signal'"), std::string::npos);
  EXPECT_NE(a.error().message.find("NaN"), std::string::npos);

  auto b = Curve::from_columns(columns({0.0, inf, 1.0}, {1, 2, 3}));
  ASSERT_FALSE(b);
  EXPECT_NE(b.error().message.find("row 2"), std::string::npos) << b.error().message;
  EXPECT_NE(b.error().message.find("'volume_ml'"), std::string::npos);

  CurveColumns c = columns({0.0, 0.5, 1.0}, {1, 2, 3});
  c.time_s = {0.0, 1.0, -inf};
  auto t = Curve::from_columns(c);
  ASSERT_FALSE(t);
  EXPECT_NE(t.error().message.find("row 3"), std::string::npos) << t.error().message;
  EXPECT_NE(t.error().message.find("'time_s'"), std::string::npos);
}

TEST(Curve, MismatchedLengthsAreRejected) {
  auto a = Curve::from_columns(columns({0.0, 0.5, 1.0}, {1, 2}));
  ASSERT_FALSE(a);
  EXPECT_NE(a.error().message.find("'signal'"), std::string::npos) << a.error().message;
  CurveColumns c = columns({0.0, 0.5, 1.0}, {1, 2, 3});
  c.temperature_c = {25.0};
  auto b = Curve::from_columns(c);
  ASSERT_FALSE(b);
  EXPECT_NE(b.error().message.find("'temperature_c'"), std::string::npos) << b.error().message;
}

TEST(Curve, TooFewPointsAfterMergingIsRejected) {
  auto empty = Curve::from_columns(columns({}, {}));
  ASSERT_FALSE(empty);
  auto two = Curve::from_columns(columns({0.0, 1.0, 1.0, 1.0}, {1, 2, 3, 4}));
  ASSERT_FALSE(two);
  EXPECT_NE(two.error().message.find("2 points"), std::string::npos) << two.error().message;
  EXPECT_TRUE(Curve::from_columns(columns({0.0, 1.0, 2.0}, {1, 2, 3})));
}

TEST(Curve, BadSampleVolumeIsRejected) {
  CurveColumns c = columns({0.0, 0.5, 1.0}, {1, 2, 3});
  c.sample_volume_ml = -5.0;
  EXPECT_FALSE(Curve::from_columns(c));
  c.sample_volume_ml = std::numeric_limits<double>::quiet_NaN();
  EXPECT_FALSE(Curve::from_columns(c));
}

}  // namespace
}  // namespace veq::detection
