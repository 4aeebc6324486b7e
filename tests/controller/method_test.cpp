// Method files: the two example files, write -> parse round trips, every
// kind of validation error with its line and field, and the dosing names
// shared with controller/dosing.hpp.
#include <gtest/gtest.h>

#include <algorithm>
#include <fstream>
#include <set>
#include <sstream>
#include <string>
#include <vector>

#include "controller/dosing.hpp"
#include "controller/method/method_file.hpp"
#include "controller/results.hpp"

namespace veq::method {
namespace {

std::string example(const char* name) {
  return std::string(VEQ_SOURCE_DIR) + "/docs/examples/" + name;
}

std::vector<std::string> step_kinds(const Method& m) {
  std::vector<std::string> out;
  for (const auto& s : m.steps)
    out.emplace_back(step_kind_name(s));
  return out;
}

TEST(MethodFile, ReadsTheHardnessExample) {
  auto m = read_method_file(example("tap-water-hardness.method"));
  ASSERT_TRUE(m.has_value()) << m.error().message;
  EXPECT_EQ(m->name, "tap water total hardness");
  EXPECT_EQ(m->replicates, 2);
  ASSERT_EQ(m->titrants.size(), 1u);
  EXPECT_EQ(m->titrants[0].burette, "burette 1");
  EXPECT_EQ(m->indication.kind, IndicationKind::electrode);
  EXPECT_TRUE(m->indication.needs_calibration);
  EXPECT_EQ(m->result.unit, "mg/L");
  EXPECT_DOUBLE_EQ(m->result.molar_mass_g_per_mol, 100.086);
  EXPECT_TRUE(m->result.replicate_difference_relative);
  EXPECT_DOUBLE_EQ(*m->result.largest_replicate_difference, 1.0);
  EXPECT_EQ(step_kinds(*m), (std::vector<std::string>{"add reagent", "adjust ph", "wait", "titrate",
                                                      "evaluate", "rinse"}));
  const auto& titrate = std::get<TitrateStep>(m->steps[3]);
  EXPECT_EQ(titrate.dosing, "adaptive increments");
  EXPECT_DOUBLE_EQ(titrate.dosing_options.at("largest_step_ml").get<double>(), 0.3);
  EXPECT_DOUBLE_EQ(titrate.time_limit_s, 1800.0);  // 30 min
  const auto& evaluate = std::get<EvaluateStep>(m->steps[4]);
  EXPECT_DOUBLE_EQ(evaluate.expected_from_ml, 2.0);
  EXPECT_DOUBLE_EQ(evaluate.expected_to_ml, 15.0);
}

TEST(MethodFile, ReadsTheBackTitrationExample) {
  auto m = read_method_file(example("nickel-back-titration.method"));
  ASSERT_TRUE(m.has_value()) << m.error().message;
  EXPECT_EQ(step_kinds(*m),
            (std::vector<std::string>{"add titrant", "add reagent", "adjust ph", "wait",
                                      "back titrate", "evaluate", "rinse"}));
  EXPECT_EQ(m->indication.kind, IndicationKind::photometer);
  EXPECT_FALSE(m->indication.needs_calibration);
  EXPECT_FALSE(m->result.replicate_difference_relative);
  EXPECT_DOUBLE_EQ(*m->result.largest_replicate_difference, 0.5);
  EXPECT_DOUBLE_EQ(std::get<WaitStep>(m->steps[3]).duration_s, 120.0);  // 2 min
  const auto& back = std::get<BackTitrateStep>(m->steps[4]);
  EXPECT_EQ(back.titrant, "zinc standard 0.01 mol/L");
  const auto& rinse = std::get<RinseStep>(m->steps[6]);  // all defaults
  EXPECT_EQ(rinse, RinseStep{});
}

TEST(MethodFile, ReadsTheTwoStageExample) {
  auto m = read_method_file(example("iron-zinc-two-stage.method"));
  ASSERT_TRUE(m.has_value()) << m.error().message;
  EXPECT_EQ(titration_stages(m->steps), (std::vector<std::size_t>{2, 6}));
  ASSERT_EQ(m->more_results.size(), 1u);
  EXPECT_EQ(m->result.analyte, "iron");
  EXPECT_EQ(m->result.stage, 1);
  EXPECT_EQ(m->result.counted_from, CountedFrom::stage_start);
  EXPECT_EQ(m->more_results[0].analyte, "zinc");
  EXPECT_EQ(m->more_results[0].stage, 2);
  EXPECT_EQ(m->more_results[0].counted_from, CountedFrom::previous_endpoint);
  EXPECT_TRUE(m->more_results[0].less.empty());
  EXPECT_DOUBLE_EQ(std::get<AdjustPhStep>(m->steps[4]).target_ph, 5.5);
}

TEST(MethodFile, WriteThenParseGivesTheSameMethod) {
  for (const char* name : {"tap-water-hardness.method", "nickel-back-titration.method",
                           "iron-zinc-two-stage.method"}) {
    auto m = read_method_file(example(name));
    ASSERT_TRUE(m.has_value()) << m.error().message;
    const std::string text = write_method(*m);
    auto again = parse_method(text, name);
    ASSERT_TRUE(again.has_value()) << again.error().message << "\n" << text;
    EXPECT_EQ(*again, *m) << name;
    EXPECT_EQ(write_method(*again), text) << name;
  }
}

TEST(MethodFile, RoundTripKeepsUnitConversionsAndAwkwardNumbers) {
  const std::string text = R"(
[method]
name = conversions
version = 7
[titrant]
name = EDTA
burette = b1
[indication]
kind = electrode
name = e1
needs calibration = no
[result]
analyte = zinc
molar mass = 65.38 g/mol
analyte per titrant = 0.5
unit = mol/L
[step]
kind = wait
duration = 0.25 h
[step]
kind = titrate
titrant = EDTA
dosing = model guided
dosing options = {"required_uncertainty_ml": 0.003, "points_past_endpoint": 6}
initial volume = 1500 uL
largest volume = 0.02 L
[step]
kind = evaluate
endpoint method = gran
options = {}
expected endpoint = 0.1 mL to 19.99 mL
)";
  auto m = parse_method(text, "conversions");
  ASSERT_TRUE(m.has_value()) << m.error().message;
  EXPECT_EQ(m->version, 7);
  EXPECT_DOUBLE_EQ(std::get<WaitStep>(m->steps[0]).duration_s, 900.0);
  const auto& t = std::get<TitrateStep>(m->steps[1]);
  EXPECT_DOUBLE_EQ(t.initial_volume_ml, 1.5);
  EXPECT_DOUBLE_EQ(t.largest_volume_ml, 20.0);
  auto again = parse_method(write_method(*m), "again");
  ASSERT_TRUE(again.has_value()) << again.error().message;
  EXPECT_EQ(*again, *m);
  EXPECT_TRUE(validate_method(*m).has_value());
}

// A small valid file; each case below changes one line and expects the error
// at a given line and field.
const std::vector<std::string> kBase = {
    "[method]",                        // 1
    "name = test",                     // 2
    "replicates = 2",                  // 3
    "[titrant]",                       // 4
    "name = EDTA",                     // 5
    "burette = b1",                    // 6
    "[reagent]",                       // 7
    "name = buffer",                   // 8
    "doser = d1",                      // 9
    "[indication]",                    // 10
    "kind = electrode",                // 11
    "name = e1",                       // 12
    "[result]",                        // 13
    "analyte = calcium",               // 14
    "molar mass = 40.078 g/mol",       // 15
    "unit = mmol/L",                   // 16
    "[step]",                          // 17
    "kind = add reagent",              // 18
    "reagent = buffer",                // 19
    "volume = 2 mL",                   // 20
    "[step]",                          // 21
    "kind = titrate",                  // 22
    "titrant = EDTA",                  // 23
    "dosing = fixed increments",       // 24
    "largest volume = 20 mL",          // 25
    "[step]",                          // 26
    "kind = evaluate",                 // 27
    "endpoint method = derivative",    // 28
    "expected endpoint = 1 to 15 mL",  // 29
};

std::string with(std::vector<std::pair<int, std::string>> changes) {
  auto lines = kBase;
  for (auto& [line, text] : changes)
    lines[static_cast<std::size_t>(line - 1)] = text;
  std::string out;
  for (const auto& l : lines)
    out += l + "\n";
  return out;
}

TEST(MethodFile, TheBaseFileIsValid) {
  auto m = parse_method(with({}), "base");
  ASSERT_TRUE(m.has_value()) << m.error().message;
  EXPECT_EQ(m->steps.size(), 3u);
}

TEST(MethodFile, AMethodWithOneResultIsWrittenAsBeforeStages) {
  // The [result] section of a one-result method carries no stage keys, so
  // that files written before two-stage methods existed read and write
  // unchanged.
  auto m = parse_method(with({}), "base");
  ASSERT_TRUE(m.has_value()) << m.error().message;
  const std::string text = write_method(*m);
  EXPECT_NE(text.find("[result]\nanalyte = calcium\nmolar mass = 40.078 g/mol\nanalyte per "
                      "titrant = 1\nunit = mmol/L\n\n[step]"),
            std::string::npos)
      << text;
  EXPECT_EQ(text.find("stage"), std::string::npos) << text;
  EXPECT_EQ(text.find("counted from"), std::string::npos) << text;
}

/// kBase with a second stage (pH raised, titrated again) and `results` in
/// place of its one [result] section (lines 13 to 16).
std::string two_stages(const std::string& results) {
  std::string out;
  for (std::size_t i = 0; i < kBase.size(); ++i) {
    if (i == 12)
      out += results;
    if (i >= 12 && i <= 15)
      continue;
    out += kBase[i] + "\n";
  }
  return out +
         "[step]\nkind = adjust ph\ntarget = 10\ntolerance = 0.2\nbase = buffer\nlargest total "
         "volume = 2 mL\n[step]\nkind = titrate\ntitrant = EDTA\ndosing = fixed "
         "increments\nlargest volume = 20 mL\n[step]\nkind = evaluate\nendpoint method = "
         "derivative\nexpected endpoint = 1 to 15 mL\n";
}

const std::string kCalciumResult =
    "[result]\nanalyte = calcium\nmolar mass = 40.078 g/mol\nunit = mmol/L\nstage = 1\n";

TEST(MethodFile, TwoStageResultsRoundTrip) {
  // Calcium from stage 1, calcium and magnesium together from the start of
  // stage 1 to stage 2's endpoint, magnesium as their difference.
  const std::string text =
      two_stages(kCalciumResult +
                 "[result]\nanalyte = calcium and magnesium\nmolar mass = 100.086 g/mol\nunit "
                 "= mmol/L\nstage = 2\ncounted from = first stage start\n"
                 "[result]\nanalyte = magnesium\nmolar mass = 24.305 g/mol\nunit = mg/L\n"
                 "stage = 2\ncounted from = first stage start\nless = calcium\n");
  auto m = parse_method(text, "three results");
  ASSERT_TRUE(m.has_value()) << m.error().message;
  ASSERT_EQ(result_rules(*m).size(), 3u);
  EXPECT_EQ(m->more_results[1].less, "calcium");
  EXPECT_EQ(m->more_results[1].counted_from, CountedFrom::first_stage_start);
  const std::string written = write_method(*m);
  auto again = parse_method(written, "again");
  ASSERT_TRUE(again.has_value()) << again.error().message << "\n" << written;
  EXPECT_EQ(*again, *m);
  EXPECT_EQ(write_method(*again), written);
  EXPECT_TRUE(validate_method(*m).has_value());
}

TEST(MethodFile, TwoStageResultErrorsNameTheirLineAndField) {
  struct Case {
    const char* what;
    std::string results;
    int line;  // within the results text, counted from its first line
    const char* field;
    const char* says;
  };
  const std::string zinc = "[result]\nanalyte = zinc\nmolar mass = 65.38 g/mol\nunit = mg/L\n";
  const std::vector<Case> cases = {
      {"a stage that does not exist", kCalciumResult + zinc + "stage = 3\n", 10, "stage",
       "stage 3 does not exist: the method titrates in 2 stages"},
      {"previous endpoint of the first stage",
       kCalciumResult + zinc + "stage = 1\ncounted from = previous endpoint\n", 11, "counted from",
       "needs a stage before this result's stage 1"},
      {"an unknown way of counting", kCalciumResult + zinc + "counted from = halfway\n", 10,
       "counted from", "unknown value 'halfway'"},
      {"less names no earlier result", zinc + "less = calcium\n" + kCalciumResult, 5, "less",
       "'calcium' is not the analyte of a result given before this one"},
      {"the same analyte twice", kCalciumResult + kCalciumResult, 7, "analyte",
       "result 'calcium' is already given at line"},
      {"a stage number below 1", kCalciumResult + zinc + "stage = 0\n", 10, "stage",
       "out of range"},
  };
  for (const auto& c : cases) {
    const std::string text = two_stages(c.results);
    auto m = parse_method(text, "bad.method");
    ASSERT_FALSE(m.has_value()) << c.what;
    const std::string where =
        "bad.method: line " + std::to_string(12 + c.line) + ", field '" + c.field + "'";
    EXPECT_NE(m.error().message.find(where), std::string::npos)
        << c.what << ": " << m.error().message;
    EXPECT_NE(m.error().message.find(c.says), std::string::npos)
        << c.what << ": " << m.error().message;
  }
}

TEST(MethodFile, CountingOverStagesNeedsOneTitrant) {
  // A second titrant for stage 2: titrant cannot be counted across.
  std::string text = two_stages(kCalciumResult +
                                "[result]\nanalyte = zinc\nmolar mass = 65.38 g/mol\nunit = "
                                "mg/L\nstage = 2\ncounted from = previous endpoint\n");
  text.replace(text.find("[reagent]"), 0, "[titrant]\nname = zinc standard\nburette = b2\n");
  const auto second = text.rfind("titrant = EDTA");
  text.replace(second, 14, "titrant = zinc standard");
  auto m = parse_method(text, "two titrants");
  ASSERT_FALSE(m.has_value());
  EXPECT_NE(m.error().message.find("field 'counted from': 'previous endpoint' needs stages 1 to "
                                   "2 to be titrate steps with one titrant (stage 1 titrates "
                                   "with 'EDTA', stage 2 with 'zinc standard')"),
            std::string::npos)
      << m.error().message;
}

/// docs/examples/copper-magnesium-one-curve.method as text.
std::string one_curve_text() {
  std::ifstream in(std::string(VEQ_SOURCE_DIR) +
                   "/docs/examples/copper-magnesium-one-curve.method");
  std::ostringstream text;
  text << in.rdbuf();
  return text.str();
}

/// `text` with the first `from` replaced by `to`.
std::string replaced(std::string text, const std::string& from, const std::string& to) {
  const auto at = text.find(from);
  EXPECT_NE(at, std::string::npos) << from;
  if (at != std::string::npos)
    text.replace(at, from.size(), to);
  return text;
}

TEST(MethodFile, TwoEndpointsOfOneCurveRoundTrip) {
  auto m = parse_method(one_curve_text(), "one curve");
  ASSERT_TRUE(m.has_value()) << m.error().message;
  const auto* titrate = std::get_if<TitrateStep>(&m->steps[1]);
  ASSERT_NE(titrate, nullptr);
  EXPECT_EQ(titrate->endpoints, 2);
  const auto rules = result_rules(*m);
  ASSERT_EQ(rules.size(), 3u);
  EXPECT_EQ(rules[0].endpoint, 1);
  EXPECT_EQ(rules[1].endpoint, 2);
  EXPECT_EQ(rules[1].counted_from, CountedFrom::previous_endpoint);
  EXPECT_EQ(rules[2].endpoint, 2);
  EXPECT_EQ(rules[2].counted_from, CountedFrom::stage_start);
  const std::string written = write_method(*m);
  auto again = parse_method(written, "again");
  ASSERT_TRUE(again.has_value()) << again.error().message << "\n" << written;
  EXPECT_EQ(*again, *m);
  EXPECT_EQ(write_method(*again), written);
  // A one-endpoint titration writes no 'endpoints' nor 'endpoint' line, as before.
  const std::string plain = write_method(parse_method(two_stages(kCalciumResult), "x").value());
  EXPECT_EQ(plain.find("\nendpoints ="), std::string::npos) << plain;
  EXPECT_EQ(plain.find("\nendpoint ="), std::string::npos) << plain;
}

TEST(MethodFile, TwoEndpointErrorsNameTheirLineAndField) {
  const std::string text = one_curve_text();
  const auto line_of = [&](const std::string& what, std::size_t from = 0) {
    const auto at = text.find(what, from);
    return 1 +
           static_cast<int>(std::count(text.begin(), text.begin() + static_cast<long>(at), '\n'));
  };
  struct Case {
    const char* what;
    std::string text;
    int line;
    const char* field;
    const char* says;
  };
  const std::vector<Case> cases = {
      {"a result that does not say which endpoint",
       replaced(text, "stage = 1\nendpoint = 1\n", "stage = 1\n"), line_of("analyte = copper\n"),
       "endpoint",
       "stage 1 passes 2 endpoints: say which one result 'copper' reads (endpoint = 1 to 2)"},
      {"an endpoint the curve does not pass",
       replaced(text, "endpoint = 2\ncounted from = previous",
                "endpoint = 3\ncounted from = previous"),
       line_of("endpoint = 2\ncounted from = previous"), "endpoint",
       "stage 1 passes 2 endpoints (its titrate step's 'endpoints'), not 3"},
      {"the previous endpoint of the first endpoint",
       replaced(text, "endpoint = 1\ncounted from = stage start",
                "endpoint = 1\ncounted from = previous endpoint"),
       line_of("counted from = stage start"), "counted from",
       "needs a stage before this result's stage 1"},
      {"dosing that ends at its first endpoint",
       replaced(text, "dosing = adaptive increments", "dosing = model guided"),
       line_of("endpoints = 2"), "endpoints",
       "dosing 'model guided' ends the titration at its first endpoint; 2 endpoints need fixed or "
       "adaptive increments"},
      {"more endpoints than a curve may have", replaced(text, "endpoints = 2", "endpoints = 6"),
       line_of("endpoints = 2"), "endpoints", "out of range"},
  };
  for (const auto& c : cases) {
    auto m = parse_method(c.text, "bad.method");
    ASSERT_FALSE(m.has_value()) << c.what;
    const std::string where =
        "bad.method: line " + std::to_string(c.line) + ", field '" + c.field + "'";
    EXPECT_NE(m.error().message.find(where), std::string::npos)
        << c.what << ": " << m.error().message;
    EXPECT_NE(m.error().message.find(c.says), std::string::npos)
        << c.what << ": " << m.error().message;
  }
}

struct BadCase {
  const char* what;
  std::vector<std::pair<int, std::string>> changes;
  int line;
  const char* field;
  const char* says;
};

TEST(MethodFile, EveryErrorNamesItsLineAndField) {
  const std::vector<BadCase> cases = {
      {"unknown key", {{3, "replicate = 2"}}, 3, "replicate", "unknown key"},
      {"missing required field", {{20, "# no volume"}}, 17, "volume", "missing"},
      {"value out of range", {{20, "volume = -2 mL"}}, 20, "volume", "out of range"},
      {"zero volume", {{20, "volume = 0 mL"}}, 20, "volume", "out of range"},
      {"wrong unit", {{20, "volume = 2 kg"}}, 20, "volume", "wrong unit 'kg'"},
      {"missing unit", {{15, "molar mass = 40.078"}}, 15, "molar mass", "needs a unit"},
      {"not a number", {{20, "volume = two mL"}}, 20, "volume", "does not start with a number"},
      {"too many replicates", {{3, "replicates = 50"}}, 3, "replicates", "out of range"},
      {"unknown step kind", {{18, "kind = stirr"}}, 18, "kind", "unknown value 'stirr'"},
      {"unknown section", {{7, "[reagents]"}}, 7, "reagents", "unknown section"},
      {"key given twice", {{3, "name = again"}}, 3, "name", "given twice"},
      {"key before any section", {{1, "name = loose"}}, 1, "name", "before any [section]"},
      {"evaluate before any titration",
       {{18, "kind = evaluate"},
        {19, "endpoint method = derivative"},
        {20, "expected endpoint = 1 to 15 mL"}},
       18,
       "kind",
       "evaluate comes before any titration"},
      {"titration never evaluated",
       {{26, "# gone"}, {27, "# gone"}, {28, "# gone"}, {29, "# gone"}},
       22,
       "kind",
       "never evaluated"},
      {"back titration without an excess",
       {{22, "kind = back titrate"}},
       22,
       "kind",
       "needs an excess added before it"},
      {"reagent not declared", {{19, "reagent = bufer"}}, 19, "reagent", "not listed"},
      {"titrant not declared", {{23, "titrant = EGTA"}}, 23, "titrant", "not listed"},
      {"unknown dosing strategy", {{24, "dosing = big steps"}}, 24, "dosing", "unknown value"},
      {"unknown dosing option",
       {{25, "largest volume = 20 mL\ndosing options = {\"increment\": 1}"}},
       26,
       "dosing options",
       "unknown option 'increment'"},
      {"dosing options not JSON",
       {{25, "largest volume = 20 mL\ndosing options = {bad"}},
       26,
       "dosing options",
       "JSON object"},
      {"endpoint option unknown to detection",
       {{28, "endpoint method = derivative\noptions = {\"nonsense\": 1}"}},
       29,
       "options",
       "nonsense"},
      {"unknown endpoint method",
       {{28, "endpoint method = guess"}},
       28,
       "endpoint method",
       "known: derivative"},
      {"endpoint range beyond the burette",
       {{29, "expected endpoint = 1 to 25 mL"}},
       29,
       "expected endpoint",
       "beyond the titration's largest volume"},
      {"endpoint range reversed",
       {{29, "expected endpoint = 15 to 1 mL"}},
       29,
       "expected endpoint",
       "end above its start"},
      {"acceptance limit in another unit",
       {{16, "unit = mmol/L\nlowest = 1 mg/L"}},
       17,
       "lowest",
       "wrong unit 'mg/L'"},
      {"pH given a unit",
       {{18, "kind = adjust ph"}, {19, "target = 10 pH"}},
       19,
       "target",
       "wrong unit 'pH'"},
      {"neither acid nor base",
       {{18, "kind = adjust ph"},
        {19, "target = 10"},
        {20, "tolerance = 0.1\nlargest total volume = 1 mL"}},
       17,
       "acid",
       "missing"},
      {"two evaluations of one titration",
       {{29,
         "expected endpoint = 1 to 15 mL\n[step]\nkind = evaluate\nendpoint method = "
         "derivative\nexpected endpoint = 1 to 15 mL"}},
       31,
       "kind",
       "evaluate follows no titration of its own"},
      {"two titrants on one burette",
       {{6, "burette = b1\n[titrant]\nname = zinc\nburette = b1"}},
       7,
       "burette",
       "already holds titrant 'EDTA'"},
      {"an excess not titrated back before a titration",
       {{17, "[step]\nkind = add titrant\ntitrant = EDTA\nvolume = 10 mL\n[step]"}},
       26,
       "kind",
       "must be titrated back"},
      {"yes or no",
       {{12, "name = e1\nneeds calibration = maybe"}},
       13,
       "needs calibration",
       "yes or no"},
  };
  for (const auto& c : cases) {
    auto m = parse_method(with(c.changes), "bad.method");
    ASSERT_FALSE(m.has_value()) << c.what;
    const std::string& message = m.error().message;
    const std::string where =
        "bad.method: line " + std::to_string(c.line) + ", field '" + c.field + "'";
    EXPECT_NE(message.find(where), std::string::npos) << c.what << ": " << message;
    EXPECT_NE(message.find(c.says), std::string::npos) << c.what << ": " << message;
    EXPECT_EQ(m.error().kind, ErrorKind::invalid_input) << c.what;
  }
}

TEST(MethodFile, MissingSectionsAreNamed) {
  auto m = parse_method("[method]\nname = x\n", "short.method");
  ASSERT_FALSE(m.has_value());
  EXPECT_NE(m.error().message.find("short.method: line 2, field 'indication'"), std::string::npos)
      << m.error().message;
}

TEST(MethodFile, ValidateMethodRefusesAMethodBuiltWrongInCode) {
  auto m = read_method_file(example("tap-water-hardness.method"));
  ASSERT_TRUE(m.has_value());
  Method bad = *m;
  std::swap(bad.steps[3], bad.steps[4]);  // evaluate before titrate
  auto checked = validate_method(bad);
  ASSERT_FALSE(checked.has_value());
  EXPECT_NE(checked.error().message.find("evaluate comes before any titration"), std::string::npos)
      << checked.error().message;
}

// The method library keeps its own list of dosing names (it sits below the
// controller); the controller must accept every one of them.
TEST(MethodFile, DosingNamesAreThoseOfTheController) {
  for (auto name : dosing_strategy_names()) {
    auto plan = controller::dosing_plan_from_json({{"kind", std::string(name)}});
    ASSERT_TRUE(plan.has_value()) << name;
    EXPECT_EQ(controller::dosing_kind_name(plan->kind), name);
  }
  std::set<std::string> controller_options;
  const nlohmann::json plan = controller::to_json(controller::DosingPlan{});
  for (auto it = plan.begin(); it != plan.end(); ++it)
    if (it.key() != "kind")
      controller_options.insert(it.key());
  std::set<std::string> ours;
  for (auto name : dosing_option_names())
    ours.insert(std::string(name));
  EXPECT_EQ(ours, controller_options);
}

TEST(MethodFile, TheControllerReadsTheExamplesDosingPlans) {
  auto m = read_method_file(example("tap-water-hardness.method")).value();
  auto plan =
      controller::dosing_plan_from_json(dosing_plan_json(std::get<TitrateStep>(m.steps[3])));
  ASSERT_TRUE(plan.has_value()) << plan.error().message;
  EXPECT_EQ(plan->kind, controller::DosingKind::adaptive_increments);
  EXPECT_DOUBLE_EQ(plan->largest_step_ml, 0.3);
  m = read_method_file(example("nickel-back-titration.method")).value();
  plan = controller::dosing_plan_from_json(dosing_plan_json(std::get<BackTitrateStep>(m.steps[4])));
  ASSERT_TRUE(plan.has_value()) << plan.error().message;
  EXPECT_EQ(plan->kind, controller::DosingKind::fixed_increments);
  EXPECT_DOUBLE_EQ(plan->increment_ml, 0.05);
}

TEST(MethodFile, ResultUnitsAreThoseOfTheController) {
  for (auto unit : result_units())
    EXPECT_TRUE(controller::result_unit_from_name(unit).has_value()) << unit;
}

TEST(MethodFile, MassFractionIsAUnitNotARelativeDifference) {
  const std::string text = with({{16, "unit = % w/w\nlargest replicate difference = 0.02 % w/w"}});
  auto m = parse_method(text, "fraction");
  ASSERT_TRUE(m.has_value()) << m.error().message;
  EXPECT_FALSE(m->result.replicate_difference_relative);
  EXPECT_DOUBLE_EQ(*m->result.largest_replicate_difference, 0.02);
  auto again = parse_method(write_method(*m), "again");
  ASSERT_TRUE(again.has_value()) << again.error().message;
  EXPECT_EQ(*again, *m);
  const std::string relative = with({{16, "unit = % w/w\nlargest replicate difference = 2 %"}});
  m = parse_method(relative, "relative");
  ASSERT_TRUE(m.has_value()) << m.error().message;
  EXPECT_TRUE(m->result.replicate_difference_relative);
}

}  // namespace
}  // namespace veq::method
