// The review views offscreen on a store filled by `veq demo` (the invented
// Ferncombe water laboratory), with three users added: an administrator, a
// reviewer and an analyst. Also writes each view's screenshot to
// docs/screenshots/.
#include <gtest/gtest.h>
#include <unistd.h>

#include <QtCore/QRegularExpression>
#include <QtGui/QTextBlock>
#include <QtTest/QTest>
#include <QtWidgets/QApplication>
#include <QtWidgets/QPlainTextEdit>
#include <QtWidgets/QTableWidget>
#include <algorithm>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>

#include "controller/audit/audit.hpp"
#include "controller/store/audit_trail.hpp"
#include "controller/store/sqlite_store.hpp"
#include "detection/evaluate.hpp"
#include "ui/review/review_logic.hpp"
#include "ui/review/review_views.hpp"

namespace veq::ui::review {
namespace {

namespace fs = std::filesystem;

/// The endpoint method the re-evaluation tests use besides the stored one.
constexpr const char* kOtherMethod = "gran";

QApplication& application() {
  if (qgetenv("QT_QPA_PLATFORM").isEmpty())
    qputenv("QT_QPA_PLATFORM", "offscreen");
  static int argc = 1;
  static char name[] = "veq_ui_review_tests";
  static char* argv[] = {name, nullptr};
  // Never destroyed: at exit, a static QApplication would be torn down after
  // Qt's own statics (QTest's keyboard device), which crashes the process.
  static QApplication* app = new QApplication(argc, argv);
  return *app;
}

/// A provider that answers every question with the same credentials and
/// counts the questions.
struct FixedAnswer {
  Credentials credentials;
  int asked = 0;
  CredentialsProvider provider() {
    return [this](const CredentialsRequest&) -> std::optional<Credentials> {
      ++asked;
      return credentials;
    };
  }
};

/// The demo's store, made once per build of `veq` by two runs of `veq demo`
/// into one file (two series: the control chart needs several check
/// standards), and copied by each test process (ctest runs every test in a
/// process of its own; the demo takes seconds).
std::string demo_store() {
  const fs::path folder = fs::path(VEQ_BINARY_DIR) / "tests" / "review-demo";
  const fs::path cached = folder / "demo.sqlite";
  const fs::path veq = fs::path(VEQ_BINARY_DIR) / "bin" / "veq";
  std::error_code error;
  if (fs::exists(cached, error) && fs::last_write_time(cached) >= fs::last_write_time(veq))
    return cached.string();
  fs::create_directories(folder);
  const fs::path scratch = folder / ("making-" + std::to_string(::getpid()) + ".sqlite");
  fs::remove(scratch, error);
  for (int i = 0; i < 2; ++i) {
    // The demo's exit status says whether every sample gave a result; one
    // fails on purpose (an electrode fault). The store is what matters here.
    const std::string command = veq.string() + " demo --db '" + scratch.string() + "' > '" +
                                (folder / "demo.log").string() + "' 2>&1";
    (void)std::system(command.c_str());
  }
  // A rename is atomic: a test process running beside this one sees the
  // whole file or none.
  fs::rename(scratch, cached, error);
  if (error) {
    ADD_FAILURE() << "could not make " << cached << ": " << error.message();
    return {};
  }
  return cached.string();
}

class ReviewStore : public ::testing::Test {
 protected:
  static void SetUpTestSuite() {
    application();
    dir_ = fs::temp_directory_path() / ("veq-review-test-" + std::to_string(::getpid()));
    fs::create_directories(dir_);
    db_ = (dir_ / "demo.sqlite").string();
    const std::string demo = demo_store();
    ASSERT_FALSE(demo.empty());
    fs::copy_file(demo, db_);
    auto trail =
        store::AuditTrail::open(db_, controller::audit::default_key_path(db_).string(), true);
    ASSERT_TRUE(trail.has_value()) << trail.error().message;
    // A low hash cost keeps the tests fast; verification reads the cost
    // stored with each hash.
    (*trail)->set_password_cost({10, 8, 1});
    using controller::audit::Role;
    ASSERT_TRUE((*trail)->add_user("", "", "ada", Role::administrator, kAdminPassword));
    ASSERT_TRUE(
        (*trail)->add_user("ada", kAdminPassword, "rita", Role::reviewer, kReviewerPassword));
    ASSERT_TRUE((*trail)->add_user("ada", kAdminPassword, "alex", Role::analyst, kAnalystPassword));
  }
  static void TearDownTestSuite() { fs::remove_all(dir_); }

  void SetUp() override {
    auto s = store::SqliteStore::open(db_);
    ASSERT_TRUE(s.has_value()) << s.error().message;
    store_ = std::move(s).value();
    auto runs = store_->list_runs();
    ASSERT_TRUE(runs.has_value());
    ASSERT_FALSE(runs->empty()) << "veq demo stored no runs";
  }

  /// A completed run with at least one stored evaluation that found an endpoint.
  std::int64_t evaluated_run() {
    auto runs = store_->list_runs();
    for (const auto& r : *runs) {
      if (r.status != store::RunStatus::completed)
        continue;
      auto e = store_->load_evaluations(r.id);
      if (e && !e->empty() && !e->front().endpoints.empty())
        return r.id;
    }
    ADD_FAILURE() << "no completed, evaluated run in the demo store";
    return 0;
  }

  static constexpr const char* kAdminPassword = "ada-password-1";
  static constexpr const char* kReviewerPassword = "rita-password-1";
  static constexpr const char* kAnalystPassword = "alex-password-1";
  static fs::path dir_;
  static std::string db_;
  std::unique_ptr<store::SqliteStore> store_;
};
fs::path ReviewStore::dir_;
std::string ReviewStore::db_;

/// The 1-based number of the first line of `text` that starts with `prefix`.
int line_starting(const QString& text, const QString& prefix) {
  const QStringList lines = text.split('\n');
  for (int i = 0; i < lines.size(); ++i)
    if (lines[i].startsWith(prefix))
      return i + 1;
  return 0;
}

// ---------------------------------------------------------------------------
// Method editor

TEST_F(ReviewStore, TypingAProblemNamesItsLineAndFixingItClearsIt) {
  MethodEditorView view;
  ASSERT_TRUE(view.set_store(store_.get()));
  auto names = store_->list_method_names();
  ASSERT_TRUE(names && !names->empty());
  ASSERT_TRUE(view.open_version(names->front()));
  ASSERT_TRUE(view.parsed().has_value()) << view.problems().join("\n").toStdString();
  const QString good = view.text();

  // Type an unknown key at the end of the [method] section's first line, as
  // a user would: the cursor after "name = ...", a new line, the key.
  auto* editor = view.findChild<QPlainTextEdit*>("method_text");
  ASSERT_NE(editor, nullptr);
  const int name_line = line_starting(good, "name = ");
  ASSERT_GT(name_line, 0);
  QTextCursor cursor(editor->document()->findBlockByNumber(name_line - 1));
  cursor.movePosition(QTextCursor::EndOfBlock);
  editor->setTextCursor(cursor);
  editor->setFocus();
  QTest::keyClick(editor, Qt::Key_Return);
  QTest::keyClicks(editor, "colour = blue");
  // Validation waits for a pause in the typing, then lists the problem.
  ASSERT_TRUE(QTest::qWaitFor([&] { return !view.problems().isEmpty(); }, 3000));
  const QString problem = view.problems().front();
  const int typed_line = name_line + 1;
  EXPECT_TRUE(problem.contains(QStringLiteral("line %1").arg(typed_line))) << problem.toStdString();
  EXPECT_TRUE(problem.contains("colour")) << problem.toStdString();
  ASSERT_TRUE(view.highlighted_line().has_value());
  EXPECT_EQ(*view.highlighted_line(), typed_line);
  EXPECT_FALSE(view.parsed().has_value());

  // Undoing the typing makes the text valid again: the list empties.
  for (int i = 0; i < 20 && view.text() != good; ++i)
    editor->undo();
  ASSERT_EQ(view.text(), good);
  ASSERT_TRUE(QTest::qWaitFor([&] { return view.problems().isEmpty(); }, 3000));
  EXPECT_FALSE(view.highlighted_line().has_value());
  EXPECT_TRUE(view.parsed().has_value());
  // The preview of a valid method names its feasibility in numbers.
  const QString preview = view.preview_text();
  EXPECT_TRUE(preview.contains("log10(C K')")) << preview.toStdString();
  // The calcium method's sample at pH 10: K' = alpha(Y4-) Kf with log Kf(CaY) =
  // 10.65 and alpha(Y4-) = 0.30 at pH 10, so log10 K' = 10.13 (D. C. Harris,
  // Quantitative Chemical Analysis, EDTA chapter, conditional formation
  // constant; recalled from memory). Ammonia barely binds calcium.
  if (view.parsed()->result.analyte == "calcium") {
    const QRegularExpression number(R"(log10 K' = ([0-9.]+) L/mol)");
    const auto match = number.match(preview);
    ASSERT_TRUE(match.hasMatch()) << preview.toStdString();
    EXPECT_NEAR(match.captured(1).toDouble(), 10.13, 0.05);
  }
}

TEST_F(ReviewStore, SavingANewVersionNeedsAnAdministratorAndIsRecorded) {
  MethodEditorView view;
  ASSERT_TRUE(view.set_store(store_.get()));
  auto names = store_->list_method_names();
  ASSERT_TRUE(names && !names->empty());
  const std::string name = names->front();
  auto before = store_->list_method_versions(name);
  ASSERT_TRUE(before && !before->empty());
  ASSERT_TRUE(view.open_version(name));
  QString text = view.text();
  const int line = line_starting(text, "description = ");
  ASSERT_GT(line, 0);
  QStringList lines = text.split('\n');
  lines[line - 1] += " (reviewed wording)";
  view.set_text(lines.join('\n'));

  // A reviewer may not change methods.
  FixedAnswer reviewer{{"rita", kReviewerPassword, "wording"}};
  view.set_credentials_provider(reviewer.provider());
  auto refused = view.save_new_version();
  ASSERT_FALSE(refused.has_value());
  EXPECT_NE(refused.error().message.find("only an administrator"), std::string::npos)
      << refused.error().message;
  EXPECT_EQ(store_->list_method_versions(name)->size(), before->size());

  FixedAnswer admin{{"ada", kAdminPassword, "clearer description"}};
  view.set_credentials_provider(admin.provider());
  auto saved = view.save_new_version();
  ASSERT_TRUE(saved.has_value()) << saved.error().message;
  EXPECT_EQ(*saved, before->back().version + 1);
  EXPECT_EQ(admin.asked, 1);
  auto stored = store_->load_method_version(name);
  ASSERT_TRUE(stored.has_value());
  EXPECT_NE(stored->text.find("(reviewed wording)"), std::string::npos);

  auto trail =
      store::AuditTrail::open(db_, controller::audit::default_key_path(db_).string(), false);
  ASSERT_TRUE(trail.has_value());
  auto records = (*trail)->records();
  ASSERT_TRUE(records && !records->empty());
  EXPECT_EQ(records->back().action, "change method");
  EXPECT_EQ(records->back().user, "ada");
  EXPECT_EQ(records->back().reason, "clearer description");
  EXPECT_EQ(records->back().new_value, "version " + std::to_string(*saved));
}

// ---------------------------------------------------------------------------
// Results and history

TEST_F(ReviewStore, ReevaluatingAStoredRunAddsAnEvaluationShownBesideTheFirst) {
  const std::int64_t run_id = evaluated_run();
  ASSERT_GT(run_id, 0);
  ResultsView view;
  ASSERT_TRUE(view.set_store(store_.get()));
  ASSERT_TRUE(view.show_run(run_id));
  auto points_before = store_->load_points(run_id);
  auto evaluations_before = store_->load_evaluations(run_id);
  ASSERT_TRUE(points_before && evaluations_before);
  const auto& first = evaluations_before->front();

  // Another endpoint method: Gran linearisation of the electrode potential.
  const std::string method = kOtherMethod;
  const std::string options = "{}";
  qint64 added = 0;
  bool ok = false, finished = false;
  QObject::connect(&view, &ResultsView::reevaluation_finished, [&](bool success, qint64 id) {
    ok = success;
    added = id;
    finished = true;
  });
  ASSERT_TRUE(view.start_reevaluation(method, options));
  ASSERT_TRUE(QTest::qWaitFor([&] { return finished; }, 10000));
  ASSERT_TRUE(ok) << view.message().toStdString();

  // One evaluation more; the raw points unchanged.
  auto evaluations_after = store_->load_evaluations(run_id);
  ASSERT_TRUE(evaluations_after.has_value());
  ASSERT_EQ(evaluations_after->size(), evaluations_before->size() + 1);
  EXPECT_EQ(evaluations_after->back().id, added);
  EXPECT_EQ(evaluations_after->back().method, method);
  auto points_after = store_->load_points(run_id);
  ASSERT_TRUE(points_after.has_value());
  ASSERT_EQ(points_after->size(), points_before->size());
  for (std::size_t i = 0; i < points_after->size(); ++i) {
    EXPECT_EQ((*points_after)[i].volume_ml, (*points_before)[i].volume_ml);
    EXPECT_EQ((*points_after)[i].signal, (*points_before)[i].signal);
  }

  // The side-by-side table shows both endpoints. The new one equals what
  // detection itself finds on the stored curve; the table prints 4 decimals,
  // so they agree within half of the last one (5e-5 mL).
  auto curve = stored_curve(*store_, run_id);
  ASSERT_TRUE(curve.has_value());
  auto direct = detection::evaluate(*curve, method, nlohmann::json::object());
  ASSERT_TRUE(direct.has_value()) << direct.error().message;
  ASSERT_FALSE(direct->endpoints.empty());
  const QString row = "endpoint 1 volume (mL)";
  const QString shown_new = view.comparison_cell(row, added);
  const QString shown_first = view.comparison_cell(row, first.id);
  ASSERT_FALSE(shown_new.isEmpty());
  ASSERT_FALSE(shown_first.isEmpty());
  EXPECT_NEAR(shown_new.toDouble(), direct->endpoints.front().volume_ml, 5e-5);
  EXPECT_NEAR(shown_first.toDouble(), first.endpoints.front().volume_ml, 5e-5);
  EXPECT_EQ(view.comparison_cell("method", added), QString::fromStdString(method));
  // Both evaluations' endpoints are drawn on the curve.
  const QStringList drawn = view.chart_names();
  EXPECT_TRUE(std::any_of(drawn.begin(), drawn.end(), [&](const QString& n) {
    return n.startsWith(QStringLiteral("evaluation %1 ").arg(added));
  })) << drawn.join(" | ").toStdString();
  EXPECT_TRUE(std::any_of(drawn.begin(), drawn.end(), [&](const QString& n) {
    return n.startsWith(QStringLiteral("evaluation %1 ").arg(first.id));
  })) << drawn.join(" | ").toStdString();
}

TEST_F(ReviewStore, UnknownEndpointOptionIsReportedByName) {
  ResultsView view;
  ASSERT_TRUE(view.set_store(store_.get()));
  ASSERT_TRUE(view.show_run(evaluated_run()));
  bool finished = false, ok = true;
  QObject::connect(&view, &ResultsView::reevaluation_finished, [&](bool success, qint64) {
    ok = success;
    finished = true;
  });
  ASSERT_TRUE(view.start_reevaluation("derivative", R"({"wobble": 3})"));
  ASSERT_TRUE(QTest::qWaitFor([&] { return finished; }, 10000));
  EXPECT_FALSE(ok);
  EXPECT_TRUE(view.message().startsWith("Problem")) << view.message().toStdString();
  EXPECT_TRUE(view.message().contains("wobble")) << view.message().toStdString();
  // Options that are not JSON are refused before any work starts.
  auto bad = view.start_reevaluation("derivative", "{window_points: 7");
  ASSERT_FALSE(bad.has_value());
  EXPECT_NE(bad.error().message.find("JSON object"), std::string::npos);
}

TEST_F(ReviewStore, SignOffWithAWrongPasswordIsRefusedWithAMessage) {
  const std::int64_t run_id = evaluated_run();
  ResultsView view;
  ASSERT_TRUE(view.set_store(store_.get()));
  ASSERT_TRUE(view.show_run(run_id));
  FixedAnswer wrong{{"rita", "not-her-password", ""}};
  view.set_credentials_provider(wrong.provider());
  auto refused = view.sign_off("reviewed and approved");
  ASSERT_FALSE(refused.has_value());
  EXPECT_TRUE(view.message().startsWith("Problem")) << view.message().toStdString();
  auto trail =
      store::AuditTrail::open(db_, controller::audit::default_key_path(db_).string(), false);
  ASSERT_TRUE(trail.has_value());
  EXPECT_TRUE((*trail)->sign_offs(run_id)->empty());

  // An analyst may not sign off, even with the right password.
  FixedAnswer analyst{{"alex", kAnalystPassword, ""}};
  view.set_credentials_provider(analyst.provider());
  EXPECT_FALSE(view.sign_off("reviewed and approved").has_value());
  EXPECT_TRUE((*trail)->sign_offs(run_id)->empty());

  FixedAnswer right{{"rita", kReviewerPassword, ""}};
  view.set_credentials_provider(right.provider());
  auto signed_off = view.sign_off("reviewed and approved");
  ASSERT_TRUE(signed_off.has_value()) << signed_off.error().message;
  auto signs = (*trail)->sign_offs(run_id);
  ASSERT_TRUE(signs.has_value());
  ASSERT_EQ(signs->size(), 1u);
  EXPECT_EQ(signs->front().reviewer, "rita");
  EXPECT_TRUE(view.message().contains("signed off by rita")) << view.message().toStdString();
}

TEST_F(ReviewStore, ChoosingAnEvaluationWithoutAReasonIsRefused) {
  const std::int64_t run_id = evaluated_run();
  ResultsView view;
  ASSERT_TRUE(view.set_store(store_.get()));
  ASSERT_TRUE(view.show_run(run_id));
  auto evaluations = store_->load_evaluations(run_id);
  ASSERT_TRUE(evaluations && !evaluations->empty());
  const std::int64_t evaluation_id = evaluations->front().id;
  auto trail =
      store::AuditTrail::open(db_, controller::audit::default_key_path(db_).string(), false);
  ASSERT_TRUE(trail.has_value());
  auto choice_before = (*trail)->evaluation_choice(run_id);
  ASSERT_TRUE(choice_before.has_value());

  FixedAnswer no_reason{{"alex", kAnalystPassword, ""}};
  view.set_credentials_provider(no_reason.provider());
  auto refused = view.choose_evaluation(evaluation_id);
  ASSERT_FALSE(refused.has_value());
  EXPECT_NE(refused.error().message.find("reason"), std::string::npos) << refused.error().message;
  EXPECT_TRUE(view.message().startsWith("Problem")) << view.message().toStdString();
  auto choice = (*trail)->evaluation_choice(run_id);
  ASSERT_TRUE(choice.has_value());
  EXPECT_EQ(choice->has_value(), choice_before->has_value());

  FixedAnswer with_reason{{"alex", kAnalystPassword, "the first evaluation is the method's own"}};
  view.set_credentials_provider(with_reason.provider());
  ASSERT_TRUE(view.choose_evaluation(evaluation_id)) << view.message().toStdString();
  choice = (*trail)->evaluation_choice(run_id);
  ASSERT_TRUE(choice.has_value() && choice->has_value());
  EXPECT_EQ((*choice)->evaluation_id, evaluation_id);
  EXPECT_EQ(view.comparison_cell("used for results", evaluation_id), "yes (chosen)");
}

TEST_F(ReviewStore, FiltersExportAndReports) {
  ResultsView view;
  ASSERT_TRUE(view.set_store(store_.get()));
  auto runs = store_->list_runs();
  ASSERT_TRUE(runs.has_value());
  EXPECT_EQ(view.listed_runs().size(), runs->size());
  RunFilter completed;
  completed.status = store::RunStatus::completed;
  view.set_filter(completed);
  const auto expected = std::count_if(runs->begin(), runs->end(), [](const store::RunRecord& r) {
    return r.status == store::RunStatus::completed;
  });
  EXPECT_EQ(static_cast<long>(view.listed_runs().size()), static_cast<long>(expected));
  RunFilter nothing;
  nothing.text = "no sample is called this";
  view.set_filter(nothing);
  EXPECT_TRUE(view.listed_runs().empty());
  // Exporting nothing says so.
  EXPECT_FALSE(view.export_listed((dir_ / "none.csv").string(), "csv").has_value());
  EXPECT_TRUE(view.message().startsWith("Problem"));

  view.set_filter(completed);
  const std::string csv = (dir_ / "results.csv").string();
  ASSERT_TRUE(view.export_listed(csv, "csv", "evaluations")) << view.message().toStdString();
  std::ifstream in(csv);
  std::string header;
  std::getline(in, header);
  EXPECT_NE(header.find("volume_ml"), std::string::npos) << header;
  const std::string json = (dir_ / "runs.json").string();
  ASSERT_TRUE(view.export_listed(json, "json")) << view.message().toStdString();
  EXPECT_GT(fs::file_size(json), 100u);
  // Writing into a folder that does not exist names the path.
  EXPECT_FALSE(view.export_listed((dir_ / "missing" / "x.csv").string(), "csv").has_value());
  EXPECT_TRUE(view.message().contains("missing")) << view.message().toStdString();

  ASSERT_TRUE(view.show_run(evaluated_run()));
  const std::string pdf = (dir_ / "run.pdf").string();
  ASSERT_TRUE(view.write_run_pdf(pdf)) << view.message().toStdString();
  std::ifstream pdf_in(pdf, std::ios::binary);
  char magic[5] = {};
  pdf_in.read(magic, 4);
  EXPECT_EQ(std::string(magic), "%PDF");

  auto series = store_->list_series();
  ASSERT_TRUE(series && !series->empty());
  ASSERT_TRUE(view.show_series(series->front().id));
  EXPECT_GT(view.statistics_table()->rowCount(), 0);
  EXPECT_GT(view.control_history_count(), 0);
  auto verdict = view.verify_audit();
  ASSERT_TRUE(verdict.has_value());
  EXPECT_TRUE(verdict->intact) << verdict->problem;
}

// ---------------------------------------------------------------------------
// Titrants, calibrations and burette checks

/// A titrant whose only titer expired long ago (invented for the tests and
/// the screenshot), added once.
store::TitrantRecord add_expired_titrant(store::SqliteStore& store) {
  store::TitrantRecord titrant{"EGTA 0.02 mol/L (old shelf)", 0.02, "lot 7",
                               "2026-01-05T09:00:00Z"};
  auto history = store.titer_history(titrant.name);
  if (history && !history->empty())
    return titrant;
  EXPECT_TRUE(store.save_titrant(titrant));
  store::TiterRecord titer;
  titer.titrant = titrant.name;
  titer.lot = "lot 7";
  titer.conc_mol_per_l = 0.01996;
  titer.determinations_mol_per_l = {0.01995, 0.01996, 0.01997};
  titer.rsd_percent = 0.05;
  titer.accepted = true;
  titer.determined_utc = "2026-01-06T09:00:00.000Z";
  titer.expires_utc = "2026-01-13T09:00:00.000Z";
  EXPECT_TRUE(store.add_titer(titer));
  return titrant;
}

TEST_F(ReviewStore, ExpiredTiterIsShownInWordsAndColour) {
  const auto titrant = add_expired_titrant(*store_);
  SuppliesView view;
  auto now = method::parse_utc("2026-12-02T12:00:00Z");
  ASSERT_TRUE(now.has_value());
  view.set_clock([t = *now] { return t; });
  ASSERT_TRUE(view.set_store(store_.get()));
  const QString status = view.status_of(QString::fromStdString(titrant.name));
  EXPECT_TRUE(status.startsWith("EXPIRED")) << status.toStdString();
  EXPECT_TRUE(status.contains("2026-01-13 09:00 UTC")) << status.toStdString();
  for (int row = 0; row < view.overview()->rowCount(); ++row) {
    if (view.overview()->item(row, 1)->text() != QString::fromStdString(titrant.name))
      continue;
    EXPECT_EQ(view.overview()->item(row, 2)->background().color(), QColor(0xC62828));
    view.show_history(row);
    ASSERT_EQ(view.history()->rowCount(), 1);
    EXPECT_TRUE(view.history()->item(0, 6)->text().startsWith("EXPIRED"));
  }
}

// ---------------------------------------------------------------------------
// Screenshots for the user guide (docs/desktop.md, "Reviewing results")

/// Saves a widget as a small PNG (256 colours are plenty for tables and line charts).
void save_screenshot(QWidget& widget, const std::string& name) {
  widget.resize(1180, 740);
  widget.show();
  QApplication::processEvents();
  const fs::path out = fs::path(VEQ_SOURCE_DIR) / "docs" / "screenshots" / name;
  const QImage image = widget.grab().toImage().convertToFormat(
      QImage::Format_Indexed8, Qt::ThresholdDither | Qt::AvoidDither);
  ASSERT_TRUE(image.save(QString::fromStdString(out.string()), "PNG", 0))
      << out;  // 0: smallest file
  EXPECT_GT(fs::file_size(out), 10000u) << out;
}

TEST_F(ReviewStore, ScreenshotsOfEachViewWithDemoData) {
  {
    MethodEditorView view;
    ASSERT_TRUE(view.set_store(store_.get()));
    auto names = store_->list_method_names();
    ASSERT_TRUE(names && !names->empty());
    ASSERT_TRUE(view.open_version(names->front()));
    save_screenshot(view, "review-methods.png");
  }
  {
    ResultsView view;
    ASSERT_TRUE(view.set_store(store_.get()));
    // A sample's run reads better than the conditioning run.
    std::int64_t run_id = evaluated_run();
    auto runs = store_->list_runs();
    ASSERT_TRUE(runs.has_value());
    for (const auto& r : *runs)
      if (r.run.sample_id == "Ferncombe spring" && r.status == store::RunStatus::completed)
        run_id = r.id;
    ASSERT_TRUE(view.show_run(run_id));
    bool finished = false;
    QObject::connect(&view, &ResultsView::reevaluation_finished,
                     [&](bool, qint64) { finished = true; });
    ASSERT_TRUE(view.start_reevaluation(kOtherMethod, "{}"));
    ASSERT_TRUE(QTest::qWaitFor([&] { return finished && !view.busy(); }, 10000));
    ASSERT_TRUE(QTest::qWaitFor([&] { return !view.busy(); }, 10000));
    save_screenshot(view, "review-results.png");
    auto series = store_->list_series();
    ASSERT_TRUE(series && !series->empty());
    ASSERT_TRUE(view.show_series(series->front().id));
    view.show_page(1);
    save_screenshot(view, "review-series.png");
    // The history with the most values: the check standards of both demo series.
    int longest = 0;
    for (int i = 0; i < view.control_history_count(); ++i)
      if (view.histories()[i].points.size() > view.histories()[longest].points.size())
        longest = i;
    ASSERT_GE(view.histories()[longest].points.size(), 3u);
    ASSERT_TRUE(view.show_control_history(longest));
    view.show_page(2);
    save_screenshot(view, "review-control-chart.png");
  }
  {
    add_expired_titrant(*store_);
    SuppliesView view;
    // The demo's virtual clock runs ahead of the wall clock (each run's
    // waiting is simulated): judge a few hours later, when its titer and
    // calibration are in force.
    view.set_clock([] {
      return std::chrono::time_point_cast<std::chrono::milliseconds>(
          std::chrono::system_clock::now() + std::chrono::hours(6));
    });
    ASSERT_TRUE(view.set_store(store_.get()));
    ASSERT_GT(view.overview()->rowCount(), 0);
    view.show_history(0);
    save_screenshot(view, "review-supplies.png");
  }
}

}  // namespace
}  // namespace veq::ui::review
