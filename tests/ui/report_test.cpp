// The PDF report: runs titrated on the simulated bench into a file store
// with a method version, a titer and an audit trail; the report's text read
// back with pdftotext (poppler-utils) and its first page rendered to PNG with
// pdftoppm. Also the `veq report` and `veq export` commands as a user meets them.
#include <gtest/gtest.h>
#include <sys/wait.h>
#include <unistd.h>

#include <QtGui/QColor>
#include <QtGui/QImage>
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <memory>
#include <sstream>
#include <string>

#include "controller/store/audit_trail.hpp"
#include "controller/store/sqlite_store.hpp"
#include "tests/controller/simulated_trial.hpp"
#include "ui/report/pdf_report.hpp"
#include "ui/report/report_from_store.hpp"

namespace veq::report {
namespace {

namespace fs = std::filesystem;
using controller::testing::demo_scenario;
using controller::testing::Trial;

std::string read_file(const fs::path& path) {
  std::ifstream in(path, std::ios::binary);
  std::stringstream s;
  s << in.rdbuf();
  return s.str();
}

/// Runs a shell command; its exit status (-1 if it did not exit normally).
int shell(const std::string& command) {
  const int status = std::system(command.c_str());
  return WIFEXITED(status) ? WEXITSTATUS(status) : -1;
}

/// The PDF's text, pages separated by form feeds, as pdftotext gives it.
std::string pdf_text(const fs::path& pdf) {
  const fs::path txt = fs::path(pdf).replace_extension(".txt");
  EXPECT_EQ(shell("pdftotext '" + pdf.string() + "' '" + txt.string() + "'"), 0)
      << "pdftotext (poppler-utils, installed by scripts/bootstrap.sh) failed on " << pdf;
  return read_file(txt);
}

std::string significant(double value, int digits) {
  char text[64];
  std::snprintf(text, sizeof text, "%.*g", digits, value);
  return text;
}

double result_value(store::RunStore& store, std::int64_t run_id, const std::string& name) {
  auto results = store.load_results(run_id);
  EXPECT_TRUE(results.has_value());
  for (const auto& r : *results) {
    if (r.name == name)
      return r.value;
  }
  ADD_FAILURE() << "run " << run_id << " has no result " << name;
  return NAN;
}

/// Three runs of the series "pond survey" (two replicates of pond-inlet, one
/// of pond-outlet) in a file store, method "titration" version 1 in use, an
/// accepted titer of three determinations, users for the audit trail.
class Report : public ::testing::Test {
 protected:
  static void SetUpTestSuite() {
    dir_ = fs::temp_directory_path() / ("veq-report-test-" + std::to_string(::getpid()));
    fs::remove_all(dir_);
    fs::create_directories(dir_);
    db_ = (dir_ / "runs.sqlite").string();
    key_ = (dir_ / "runs.audit-key").string();
    auto opened = store::SqliteStore::open(db_);
    ASSERT_TRUE(opened.has_value()) << opened.error().message;
    std::unique_ptr<store::SqliteStore> s = std::move(opened).value();

    Trial trial(demo_scenario());
    const double nominal = trial.sample.titrant_conc_mol_per_l;
    ASSERT_TRUE(s->save_titrant({"EDTA", nominal, "lot 7", store::utc_now_iso8601()}));
    // Invented demo determinations: 0.1 % apart around the label.
    store::TiterRecord titer;
    titer.titrant = "EDTA";
    titer.lot = "lot 7";
    titer.determinations_mol_per_l = {nominal * 0.999, nominal * 1.000, nominal * 1.001};
    titer.conc_mol_per_l = nominal;
    titer_rsd_percent_ = 0.1;  // sd of {-0.1, 0, +0.1} % is exactly 0.1 %
    titer.rsd_percent = titer_rsd_percent_;
    titer.accepted = true;
    titer.determined_utc = store::utc_now_iso8601();
    titer.expires_utc = "2099-01-01T00:00:00.000Z";
    ASSERT_TRUE(s->add_titer(titer));
    ASSERT_TRUE(s->save_method_version("titration", controller::to_json(trial.method).dump()));

    trial.store = std::move(s);
    const char* samples[] = {"pond-inlet", "pond-inlet", "pond-outlet"};
    for (int i = 0; i < 3; ++i) {
      Trial t(demo_scenario());
      t.store = std::move(trial.store);
      t.sample.sample_id = samples[i];
      t.sample.series = "pond survey";
      // Adaptive steps: about a quarter of the points of fixed 0.05 mL steps,
      // and each point is a synchronous write to the file store.
      t.method.dosing.kind = controller::DosingKind::adaptive_increments;
      const auto outcome = t.run();
      ASSERT_EQ(outcome.status, store::RunStatus::completed) << outcome.reason;
      run_ids_[i] = outcome.run_id;
      ASSERT_TRUE(t.store->record_method_use(outcome.run_id, "titration", 1));
      trial.store = std::move(t.store);
    }
    store_ = std::move(trial.store);

    auto trail = store::AuditTrail::open(db_, key_, true);
    ASSERT_TRUE(trail.has_value()) << trail.error().message;
    trail_ = std::move(trail).value();
    trail_->set_password_cost({10, 8, 1});  // the smallest cost: fast tests
    ASSERT_TRUE(
        trail_->add_user("", "", "admin", controller::audit::Role::administrator, "admin-pass-1"));
    ASSERT_TRUE(trail_->add_user("admin", "admin-pass-1", "rosa", controller::audit::Role::reviewer,
                                 "reviewer-pass"));
  }
  static void TearDownTestSuite() {
    trail_.reset();
    store_.reset();
    fs::remove_all(dir_);
  }
  ReportSources sources() { return ReportSources{*store_, store_.get(), trail_.get()}; }

  static inline fs::path dir_;
  static inline std::string db_, key_;
  static inline std::int64_t run_ids_[3] = {0, 0, 0};
  static inline double titer_rsd_percent_ = 0.0;
  static inline std::unique_ptr<store::SqliteStore> store_;
  static inline std::unique_ptr<store::AuditTrail> trail_;
};

TEST_F(Report, RunReportShowsResultMethodVersionAndBlankSignatureLine) {
  const std::int64_t run = run_ids_[2];  // not signed by any test
  auto data = run_report_data(sources(), run);
  ASSERT_TRUE(data.has_value()) << data.error().message;
  const fs::path pdf = dir_ / "run.pdf";
  auto written = write_run_report(*data, pdf.string());
  ASSERT_TRUE(written.has_value()) << written.error().message;
  EXPECT_EQ(read_file(pdf).substr(0, 5), "%PDF-");

  const std::string text = pdf_text(pdf);
  // The stored result as the report prints it: 6 significant digits.
  const double conc = result_value(*store_, run, "metal_concentration");
  EXPECT_NE(text.find(significant(conc, 6)), std::string::npos)
      << "no " << significant(conc, 6) << " in:\n"
      << text;
  EXPECT_NE(text.find("mmol/L"), std::string::npos);
  EXPECT_NE(text.find("titration, version 1"), std::string::npos) << text;
  EXPECT_NE(text.find("Reviewed and signed: ____"), std::string::npos) << text;
  EXPECT_NE(text.find("audit trail intact"), std::string::npos) << text;
  EXPECT_NE(text.find("titer 1.0000"), std::string::npos) << text;
  // The axis titles carry their units.
  EXPECT_NE(text.find("titrant added (mL)"), std::string::npos);
  EXPECT_NE(text.find("potential (mV)"), std::string::npos);
}

TEST_F(Report, BudgetAddsRelativeUncertaintiesInQuadrature) {
  const std::int64_t run = run_ids_[0];
  auto data = run_report_data(sources(), run);
  ASSERT_TRUE(data.has_value()) << data.error().message;
  ASSERT_TRUE(data->uncertainty.has_value());
  const auto& u = *data->uncertainty;
  ASSERT_EQ(u.rows.size(), 3u);

  // The same budget by hand, JCGM 100:2008 (GUM) 5.1.6 for a product and
  // quotient c_metal = c V / V_sample: relative uncertainties in quadrature.
  // Titrant: a mean of 3 determinations with RSD 0.1 %: 0.1 % / sqrt(3).
  // Volume: ISO 8655-3:2002 table 1, 20 mL piston burette, systematic limit
  // 40 uL taken as rectangular (EURACHEM/CITAC guide, 3rd ed., 8.1.6),
  // combined with the endpoint's standard uncertainty from the detection.
  // Sample: a class A 10 mL pipette, ±0.02 mL, rectangular (ISO 648, recalled
  // from memory). The limits are recalled from memory (docs/results.md).
  auto evaluations = store_->load_evaluations(run);
  ASSERT_TRUE(evaluations.has_value());
  const double endpoint_ml = result_value(*store_, run, "endpoint_volume");
  double endpoint_u_ml = NAN;
  for (const auto& e : *evaluations) {
    for (const auto& p : e.endpoints) {
      if (std::abs(p.volume_ml - endpoint_ml) < 1e-9)
        endpoint_u_ml = p.uncertainty_ml;
    }
  }
  ASSERT_TRUE(std::isfinite(endpoint_u_ml));
  const double sample_ml = data->sample_volume_ml;
  const double rel_c = titer_rsd_percent_ / 100.0 / std::sqrt(3.0);
  const double rel_v =
      std::sqrt(std::pow(0.040 / std::sqrt(3.0), 2) + endpoint_u_ml * endpoint_u_ml) / endpoint_ml;
  const double rel_s = 0.02 / std::sqrt(3.0) / sample_ml;
  const double conc = result_value(*store_, run, "metal_concentration");
  const double expanded = 2.0 * conc * std::sqrt(rel_c * rel_c + rel_v * rel_v + rel_s * rel_s);
  EXPECT_NEAR(u.expanded, expanded, 1e-12 * expanded);
  EXPECT_NEAR(u.rows[0].share_percent + u.rows[1].share_percent + u.rows[2].share_percent, 100.0,
              1e-9);

  // And the PDF prints it with 3 significant digits.
  const fs::path pdf = dir_ / "budget.pdf";
  ASSERT_TRUE(write_run_report(*data, pdf.string()).has_value());
  const std::string text = pdf_text(pdf);
  EXPECT_NE(text.find("U = " + significant(expanded, 3) + " mmol/L (k = 2)"), std::string::npos)
      << "expected U = " << significant(expanded, 3) << " in:\n"
      << text;
}

TEST_F(Report, SignedRunShowsTheReviewerAndTheTime) {
  const std::int64_t run = run_ids_[1];
  auto signed_off = trail_->sign_off("rosa", "reviewer-pass", run, "reviewed and approved");
  ASSERT_TRUE(signed_off.has_value()) << signed_off.error().message;
  auto data = run_report_data(sources(), run);
  ASSERT_TRUE(data.has_value()) << data.error().message;
  const fs::path pdf = dir_ / "signed.pdf";
  ASSERT_TRUE(write_run_report(*data, pdf.string()).has_value());
  const std::string text = pdf_text(pdf);
  EXPECT_NE(text.find("Reviewed and signed: rosa (reviewed and approved), " +
                      signed_off->signed_utc + " UTC"),
            std::string::npos)
      << text;
  EXPECT_EQ(text.find("Reviewed and signed: ____"), std::string::npos);
  EXPECT_NE(text.find("rosa: sign off"), std::string::npos) << "audit summary lacks the sign-off:\n"
                                                            << text;
}

TEST_F(Report, FirstPageRendersAsAnA4ImageWithTheChart) {
  auto data = run_report_data(sources(), run_ids_[0]);
  ASSERT_TRUE(data.has_value());
  const fs::path pdf = dir_ / "picture.pdf";
  ASSERT_TRUE(write_run_report(*data, pdf.string()).has_value());
  const fs::path prefix = dir_ / "page1";
  ASSERT_EQ(shell("pdftoppm -png -r 50 -f 1 -l 1 -singlefile '" + pdf.string() + "' '" +
                  prefix.string() + "'"),
            0);
  const fs::path png = prefix.string() + ".png";
  ASSERT_TRUE(fs::exists(png));
  QImage image(QString::fromStdString(png.string()));
  ASSERT_FALSE(image.isNull());
  // A4 is 210 x 297 mm (ISO 216): 413.4 x 584.6 pixels at 50 dpi, rounded.
  EXPECT_NEAR(image.width(), 210.0 / 25.4 * 50.0, 1.0);
  EXPECT_NEAR(image.height(), 297.0 / 25.4 * 50.0, 1.0);
  // Something is drawn, and the measured curve's blue is among it.
  int dark = 0, blue = 0;
  for (int y = 0; y < image.height(); ++y) {
    for (int x = 0; x < image.width(); ++x) {
      const QColor c = image.pixelColor(x, y);
      if (c.lightness() < 200)
        ++dark;
      if (c.blue() > c.red() + 60 && c.blue() > c.green() + 40)
        ++blue;
    }
  }
  const double dark_share = static_cast<double>(dark) / (image.width() * image.height());
  EXPECT_GT(dark_share, 0.02);
  EXPECT_LT(dark_share, 0.5);
  EXPECT_GT(blue, 30);
}

TEST_F(Report, SeriesReportGroupsRunsBySample) {
  auto data = series_report_data(sources(), "pond survey");
  ASSERT_TRUE(data.has_value()) << data.error().message;
  ASSERT_EQ(data->runs.size(), 3u);
  ASSERT_EQ(data->samples.size(), 2u);
  EXPECT_EQ(data->samples[0].sample_id, "pond-inlet");
  ASSERT_EQ(data->samples[0].values.size(), 2u);
  const double a = result_value(*store_, run_ids_[0], "metal_concentration");
  const double b = result_value(*store_, run_ids_[1], "metal_concentration");
  EXPECT_NEAR(data->samples[0].mean, (a + b) / 2.0, 1e-12);
  // Sample standard deviation of two values: |a - b| / sqrt(2).
  EXPECT_NEAR(data->samples[0].sd, std::abs(a - b) / std::sqrt(2.0), 1e-12);

  const fs::path pdf = dir_ / "series.pdf";
  auto written = write_series_report(*data, pdf.string());
  ASSERT_TRUE(written.has_value()) << written.error().message;
  const std::string text = pdf_text(pdf);
  EXPECT_NE(text.find("Series report: pond survey"), std::string::npos);
  EXPECT_NE(text.find(significant((a + b) / 2.0, 6)), std::string::npos) << text;
  for (const auto id : run_ids_)
    EXPECT_NE(text.find("Titration report: run " + std::to_string(id)), std::string::npos);
  // The summary page, then each run on pages of its own.
  const auto pages = std::count(text.begin(), text.end(), '\f');
  EXPECT_GE(pages, 4);

  auto none = series_report_data(sources(), "no such series");
  ASSERT_FALSE(none.has_value());
  EXPECT_EQ(none.error().kind, ErrorKind::not_found);
}

TEST_F(Report, UnknownRunAndUnwritablePathAreClearErrors) {
  auto missing = run_report_data(sources(), 999);
  ASSERT_FALSE(missing.has_value());
  EXPECT_EQ(missing.error().kind, ErrorKind::not_found);
  EXPECT_NE(missing.error().message.find("no run 999"), std::string::npos);

  auto data = run_report_data(sources(), run_ids_[0]);
  ASSERT_TRUE(data.has_value());
  const std::string path = "/nonexistent-folder-of-veq/report.pdf";
  auto written = write_run_report(*data, path);
  ASSERT_FALSE(written.has_value());
  EXPECT_EQ(written.error().kind, ErrorKind::io);
  EXPECT_NE(written.error().message.find(path), std::string::npos) << written.error().message;
}

TEST_F(Report, CommandLineReportsAndExportsWithClearErrors) {
  const std::string veq = std::string(VEQ_BINARY_DIR) + "/bin/veq";
  const std::string db = " --db '" + db_ + "'";
  const fs::path out = dir_ / "cli.pdf", err = dir_ / "cli.err";
  const std::string quiet = " > /dev/null 2> '" + err.string() + "'";
  EXPECT_EQ(shell(veq + " report" + db + " --run " + std::to_string(run_ids_[0]) + " --out '" +
                  out.string() + "'" + quiet),
            0)
      << read_file(err);
  EXPECT_EQ(read_file(out).substr(0, 5), "%PDF-");
  EXPECT_EQ(shell(veq + " report" + db + " --series 'pond survey' --out '" +
                  (dir_ / "cli-series.pdf").string() + "'" + quiet),
            0)
      << read_file(err);

  EXPECT_NE(shell(veq + " report" + db + " --run 999 --out '" + out.string() + "'" + quiet), 0);
  EXPECT_NE(read_file(err).find("no run 999"), std::string::npos) << read_file(err);
  EXPECT_NE(shell(veq + " report" + db + " --run 1 --out /nonexistent-folder-of-veq/r.pdf" + quiet),
            0);
  EXPECT_NE(read_file(err).find("cannot write /nonexistent-folder-of-veq/r.pdf"), std::string::npos)
      << read_file(err);

  const fs::path csv = dir_ / "points.csv";
  EXPECT_EQ(
      shell(veq + " export" + db + " --all --format csv --out '" + csv.string() + "'" + quiet), 0)
      << read_file(err);
  std::size_t points = 0;
  for (const auto id : run_ids_)
    points += store_->load_points(id)->size();
  const std::string text = read_file(csv);
  EXPECT_EQ(static_cast<std::size_t>(std::count(text.begin(), text.end(), '\n')), points + 1);
  EXPECT_NE(shell(veq + " export" + db + " --run 999 --out '" + csv.string() + "'" + quiet), 0);
  EXPECT_NE(read_file(err).find("no run 999"), std::string::npos) << read_file(err);
  EXPECT_NE(shell(veq + " export --db '" + (dir_ / "absent.sqlite").string() +
                  "' --all --out x.json" + quiet),
            0);
  EXPECT_NE(read_file(err).find("no store at"), std::string::npos) << read_file(err);
  EXPECT_FALSE(fs::exists(dir_ / "absent.sqlite"));
}

}  // namespace
}  // namespace veq::report
