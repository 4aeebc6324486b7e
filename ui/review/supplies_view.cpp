#include "ui/review/supplies_view.hpp"

#include <cmath>
#include <set>

#include <QtWidgets/QGroupBox>
#include <QtWidgets/QHeaderView>
#include <QtWidgets/QLabel>
#include <QtWidgets/QSplitter>
#include <QtWidgets/QTableWidget>
#include <QtWidgets/QVBoxLayout>

#include "controller/method/method_file.hpp"
#include "controller/method/titer.hpp"
#include "ui/review/review_chart.hpp"

namespace veq::ui::review {

namespace {

/// Colour and weight of a status cell. The words carry the state; the colour
/// only makes it quick to find.
void style_status(QTableWidgetItem* item, Freshness state) {
  switch (state) {
    case Freshness::expired:
    case Freshness::refused: {
      item->setBackground(QColor(0xC62828));
      item->setForeground(QColor(Qt::white));
      QFont bold = item->font();
      bold.setBold(true);
      item->setFont(bold);
      break;
    }
    case Freshness::expires_soon:
      item->setBackground(QColor(0xFFE082));
      break;
    case Freshness::none:
      item->setBackground(QColor(0xE0E0E0));
      break;
    case Freshness::valid:
      item->setBackground(QColor(0xC8E6C9));
      break;
  }
}

}  // namespace

SuppliesView::SuppliesView(QWidget* parent)
    : QWidget(parent), now_([] {
        return std::chrono::time_point_cast<std::chrono::milliseconds>(
            std::chrono::system_clock::now());
      }) {
  auto* outer = new QVBoxLayout(this);
  auto* splitter = new QSplitter(Qt::Vertical, this);
  outer->addWidget(splitter, 1);
  auto* top = new QGroupBox("Titrants, electrodes and burettes: what is in force now", splitter);
  auto* top_layout = new QVBoxLayout(top);
  overview_ =
      make_table(top, {"kind", "name", "status", "in force", "details"}, "supplies_overview");
  top_layout->addWidget(overview_);
  auto* bottom = new QGroupBox("History", splitter);
  auto* bottom_layout = new QVBoxLayout(bottom);
  history_title_ = new QLabel("Choose a row above to see its history.", bottom);
  bottom_layout->addWidget(history_title_);
  auto* lower = new QSplitter(Qt::Horizontal, bottom);
  history_ = make_table(lower, {}, "supplies_history");
  chart_ = std::make_unique<ReviewChart>(lower);
  lower->addWidget(history_);
  lower->addWidget(chart_->widget());
  lower->setStretchFactor(0, 3);
  lower->setStretchFactor(1, 2);
  lower->setSizes({640, 480});
  bottom_layout->addWidget(lower, 1);
  message_ = new MessageLine(this);
  outer->addWidget(message_);
  connect(message_, &MessageLine::problem, this, &SuppliesView::problem);
  connect(overview_, &QTableWidget::itemSelectionChanged, this,
          [this] { show_history(overview_->currentRow()); });
  chart_->clear("no history chosen");
}

SuppliesView::~SuppliesView() = default;

void SuppliesView::set_clock(std::function<method::TimePoint()> now) {
  now_ = std::move(now);
  (void)reload();
}

Result<void> SuppliesView::set_store(store::SqliteStore* store) {
  store_ = store;
  return reload();
}

void SuppliesView::add_overview_row(Kind kind, const QString& name, const QString& current,
                                    const QString& detail, const ExpiryStatus& status) {
  const int row = overview_->rowCount();
  overview_->insertRow(row);
  const char* kinds[] = {"titrant", "electrode", "burette"};
  auto* kind_item = new QTableWidgetItem(kinds[static_cast<int>(kind)]);
  kind_item->setData(Qt::UserRole, static_cast<int>(kind));
  overview_->setItem(row, 0, kind_item);
  overview_->setItem(row, 1, new QTableWidgetItem(name));
  auto* status_item = new QTableWidgetItem(q(status.text));
  style_status(status_item, status.state);
  overview_->setItem(row, 2, status_item);
  overview_->setItem(row, 3, new QTableWidgetItem(current));
  overview_->setItem(row, 4, new QTableWidgetItem(detail));
}

Result<void> SuppliesView::reload() {
  overview_->setRowCount(0);
  history_->setRowCount(0);
  if (store_ == nullptr)
    return {};
  const auto now = now_();
  auto fail = [this](const Error& e) -> Result<void> {
    message_->show_error(e);
    return e;
  };

  auto titrants = store_->list_titrants();
  if (!titrants)
    return fail(titrants.error());
  for (const auto& t : *titrants) {
    auto titers = store_->titer_history(t.name);
    if (!titers)
      return fail(titers.error());
    auto in_force = method::latest_accepted_titer(*titers, t.name, t.lot, now);
    const QString detail = QStringLiteral("nominal %1 mol/L, lot %2, prepared %3")
                               .arg(significant(t.nominal_conc_mol_per_l, 4), q(t.lot),
                                    q(readable_utc(t.prepared_utc)));
    if (in_force) {
      add_overview_row(
          Kind::titrant, q(t.name),
          QStringLiteral("titer %1 mol/L (RSD %2 %, n = %3)")
              .arg(significant(in_force->conc_mol_per_l, 5), fixed(in_force->rsd_percent, 3))
              .arg(in_force->determinations_mol_per_l.size()),
          detail, expiry_status(true, in_force->expires_utc, now));
    } else if (auto later = method::latest_accepted_titer(*titers, t.name, t.lot,
                                                          method::TimePoint::max())) {
      // Dated after now: a clock set wrong somewhere (or a simulated run ahead of it).
      add_overview_row(
          Kind::titrant, q(t.name), "no titer in force yet", detail,
          {Freshness::none, "NOT YET IN FORCE: titer dated " + readable_utc(later->determined_utc) +
                                ", after now (check the clocks)"});
    } else {
      add_overview_row(Kind::titrant, q(t.name), "no accepted titer", detail,
                       {Freshness::none, "NO TITER: determine one before use"});
    }
  }

  // The store keeps no list of electrodes and burettes: they are the ones
  // the stored methods name.
  std::set<std::string> electrodes, burettes;
  auto names = store_->list_method_names();
  if (!names)
    return fail(names.error());
  for (const auto& name : *names) {
    auto versions = store_->list_method_versions(name);
    if (!versions)
      return fail(versions.error());
    for (const auto& v : *versions) {
      auto m = method::parse_method(v.text, name);
      if (!m)
        continue;  // an unreadable old version names nothing we can trust
      if (m->indication.kind == method::IndicationKind::electrode)
        electrodes.insert(m->indication.name);
      for (const auto& t : m->titrants)
        burettes.insert(t.burette);
    }
  }
  for (const auto& e : electrodes) {
    auto calibrations = store_->calibration_history(e);
    if (!calibrations)
      return fail(calibrations.error());
    auto in_force = method::latest_accepted_calibration(*calibrations, e, now);
    if (in_force) {
      add_overview_row(
          Kind::electrode, q(e),
          QStringLiteral("slope %1 mV/decade, E0 %2 mV")
              .arg(fixed(in_force->slope_mv_per_decade, 2), fixed(in_force->e0_mv, 1)),
          QStringLiteral("at %1 °C, measured %2")
              .arg(fixed(in_force->temperature_c, 1), q(readable_utc(in_force->measured_utc))),
          expiry_status(true, in_force->expires_utc, now));
    } else if (auto later = method::latest_accepted_calibration(*calibrations, e,
                                                                method::TimePoint::max())) {
      add_overview_row(Kind::electrode, q(e), "no calibration in force yet",
                       QStringLiteral("%1 calibration(s) on record").arg(calibrations->size()),
                       {Freshness::none, "NOT YET IN FORCE: calibration dated " +
                                             readable_utc(later->measured_utc) +
                                             ", after now (check the clocks)"});
    } else {
      add_overview_row(Kind::electrode, q(e), "no accepted calibration",
                       QStringLiteral("%1 calibration(s) on record").arg(calibrations->size()),
                       {Freshness::none, "NO CALIBRATION in force"});
    }
  }
  for (const auto& b : burettes) {
    auto checks = store_->burette_check_history(b);
    if (!checks)
      return fail(checks.error());
    if (checks->empty()) {
      add_overview_row(Kind::burette, q(b), "never checked", "no gravimetric check on record",
                       {Freshness::none, "NOT CHECKED"});
      continue;
    }
    const auto& last = checks->back();
    // ISO 8655 sets no interval between checks: the view gives the age and
    // the verdict, and leaves the interval to the laboratory.
    ExpiryStatus status{last.passed ? Freshness::valid : Freshness::refused,
                        last.passed
                            ? "passed (" + readable_utc(last.checked_utc) + ")"
                            : "FAILED its last check (" + readable_utc(last.checked_utc) + ")"};
    add_overview_row(
        Kind::burette, q(b),
        QStringLiteral("systematic %1 %, random %2 % at %3 mL")
            .arg(fixed(last.systematic_error_percent, 3), fixed(last.random_error_percent, 3),
                 fixed(last.test_volume_ml, 2)),
        QStringLiteral("%1 check(s); limits: %2").arg(checks->size()).arg(q(last.limits_source)),
        status);
  }
  overview_->resizeColumnsToContents();
  overview_->resizeRowsToContents();
  message_->show_info(
      QStringLiteral("Judged at %1.").arg(q(readable_utc(method::format_utc(now)))));
  return {};
}

QString SuppliesView::status_of(const QString& name) const {
  for (int row = 0; row < overview_->rowCount(); ++row)
    if (overview_->item(row, 1)->text() == name)
      return overview_->item(row, 2)->text();
  return {};
}

void SuppliesView::show_history(int row) {
  if (store_ == nullptr || row < 0 || row >= overview_->rowCount())
    return;
  const auto kind = static_cast<Kind>(overview_->item(row, 0)->data(Qt::UserRole).toInt());
  const std::string name = overview_->item(row, 1)->text().toStdString();
  const auto now = now_();
  history_->clear();
  history_->setRowCount(0);
  auto put = [this](int r, int c, const QString& text) {
    history_->setItem(r, c, new QTableWidgetItem(text));
  };
  ChartContent content;
  content.x_is_time = true;
  content.x_title = "date (UTC)";
  ChartLine dots;
  dots.style = ChartLine::Style::points;
  if (kind == Kind::titrant) {
    auto titers = store_->titer_history(name);
    if (!titers) {
      message_->show_error(titers.error());
      return;
    }
    history_title_->setText(QStringLiteral("Titers of %1, oldest first").arg(q(name)));
    history_->setColumnCount(8);
    history_->setHorizontalHeaderLabels(
        {"determined (UTC)", "titer (mol/L)", "n", "RSD (%)", "lot", "accepted", "expiry", "note"});
    for (const auto& t : *titers) {
      const int r = history_->rowCount();
      history_->insertRow(r);
      put(r, 0, q(readable_utc(t.determined_utc)));
      put(r, 1, significant(t.conc_mol_per_l, 6));
      put(r, 2, QString::number(t.determinations_mol_per_l.size()));
      put(r, 3, fixed(t.rsd_percent, 3));
      put(r, 4, q(t.lot));
      put(r, 5, t.accepted ? "yes" : "NO");
      const auto status = expiry_status(t.accepted, t.expires_utc, now);
      auto* item = new QTableWidgetItem(q(status.text));
      style_status(item, status.state);
      history_->setItem(r, 6, item);
      put(r, 7, q(t.note));
      if (t.accepted) {
        dots.x.push_back(epoch_ms(t.determined_utc));
        dots.y.push_back(t.conc_mol_per_l);
      }
    }
    content.title = "accepted titers of " + q(name);
    content.y_title = "titer (mol/L)";
  } else if (kind == Kind::electrode) {
    auto calibrations = store_->calibration_history(name);
    if (!calibrations) {
      message_->show_error(calibrations.error());
      return;
    }
    history_title_->setText(QStringLiteral("Calibrations of %1, oldest first").arg(q(name)));
    history_->setColumnCount(6);
    history_->setHorizontalHeaderLabels({"measured (UTC)", "slope (mV/decade)", "E0 (mV)",
                                         "temperature (°C)", "accepted", "expiry"});
    for (const auto& c : *calibrations) {
      const int r = history_->rowCount();
      history_->insertRow(r);
      put(r, 0, q(readable_utc(c.measured_utc)));
      put(r, 1, fixed(c.slope_mv_per_decade, 2));
      put(r, 2, fixed(c.e0_mv, 1));
      put(r, 3, fixed(c.temperature_c, 1));
      put(r, 4, c.accepted ? "yes" : "NO");
      const auto status = expiry_status(c.accepted, c.expires_utc, now);
      auto* item = new QTableWidgetItem(q(status.text));
      style_status(item, status.state);
      history_->setItem(r, 5, item);
      dots.x.push_back(epoch_ms(c.measured_utc));
      dots.y.push_back(c.slope_mv_per_decade);
    }
    content.title = "electrode slope of " + q(name);
    content.y_title = "slope (mV/decade)";
  } else {
    auto checks = store_->burette_check_history(name);
    if (!checks) {
      message_->show_error(checks.error());
      return;
    }
    history_title_->setText(QStringLiteral("Gravimetric checks of %1, oldest first").arg(q(name)));
    history_->setColumnCount(7);
    history_->setHorizontalHeaderLabels({"checked (UTC)", "test volume (mL)", "mean delivered (mL)",
                                         "systematic error (%)", "random error (%)", "verdict",
                                         "limits"});
    for (const auto& c : *checks) {
      const int r = history_->rowCount();
      history_->insertRow(r);
      put(r, 0, q(readable_utc(c.checked_utc)));
      put(r, 1, fixed(c.test_volume_ml, 3));
      put(r, 2, fixed(c.mean_volume_ml, 4));
      put(r, 3, fixed(c.systematic_error_percent, 3));
      put(r, 4, fixed(c.random_error_percent, 3));
      auto* item = new QTableWidgetItem(c.passed ? "passed" : "FAILED");
      style_status(item, c.passed ? Freshness::valid : Freshness::refused);
      history_->setItem(r, 5, item);
      put(r, 6, q(c.limits_source));
      dots.x.push_back(epoch_ms(c.checked_utc));
      dots.y.push_back(c.systematic_error_percent);
    }
    content.title = "systematic error of " + q(name);
    content.y_title = "systematic error (%)";
  }
  dots.label = content.y_title;
  content.lines.push_back(std::move(dots));
  history_->resizeColumnsToContents();
  if (content.lines.front().x.empty())
    chart_->clear("nothing to plot yet");
  else
    chart_->show(content);
}

}  // namespace veq::ui::review
