#include "ui/run_browser.hpp"

#include <algorithm>

#include <QtWidgets/QHBoxLayout>
#include <QtWidgets/QLabel>
#include <QtWidgets/QListWidget>
#include <QtWidgets/QSplitter>
#include <QtWidgets/QVBoxLayout>

#include "ui/curve_chart.hpp"
#include "ui/run_plot.hpp"

namespace veq::ui {

const char* const kCautionText =
    "Caution: complexometric titrations use hazardous reagents, such as ammonia buffers and "
    "cyanide masking agents. Follow local rules and your laboratory's own procedures; veq does "
    "not replace them.";

namespace {
constexpr int kRunIdRole = Qt::UserRole + 1;
}

RunBrowser::RunBrowser(QWidget* parent)
    : QWidget(parent),
      curve_chart_(std::make_unique<CurveChart>()),
      derivative_chart_(std::make_unique<CurveChart>()) {
  runs_ = new QListWidget();
  runs_->setMinimumWidth(300);
  title_ = new QLabel();
  QFont title_font = title_->font();
  title_font.setPointSizeF(title_font.pointSizeF() * 1.3);
  title_font.setBold(true);
  title_->setFont(title_font);
  summary_ = new QLabel();
  summary_->setWordWrap(true);
  summary_->setTextInteractionFlags(Qt::TextSelectableByMouse);
  note_ = new QLabel();
  note_->setWordWrap(true);
  note_->setStyleSheet("color: #555555;");

  auto* charts = new QSplitter(Qt::Vertical);
  charts->addWidget(curve_chart_->widget());
  charts->addWidget(derivative_chart_->widget());
  charts->setStretchFactor(0, 3);
  charts->setStretchFactor(1, 2);

  auto* right = new QWidget();
  auto* right_layout = new QVBoxLayout(right);
  right_layout->setContentsMargins(0, 0, 0, 0);
  right_layout->addWidget(title_);
  right_layout->addWidget(summary_);
  right_layout->addWidget(charts, 1);
  right_layout->addWidget(note_);

  auto* split = new QSplitter(Qt::Horizontal);
  split->addWidget(runs_);
  split->addWidget(right);
  split->setStretchFactor(0, 0);
  split->setStretchFactor(1, 1);

  auto* caution = new QLabel(QString::fromUtf8(kCautionText));
  caution->setWordWrap(true);
  caution->setStyleSheet(
      "QLabel { background: #FFF3CD; color: #5C4400; border: 1px solid #E0C36A; padding: 4px; }");

  auto* layout = new QVBoxLayout(this);
  layout->addWidget(split, 1);
  layout->addWidget(caution);

  connect(runs_, &QListWidget::currentItemChanged, this, [this](QListWidgetItem* item) {
    if (item)
      draw(item->data(kRunIdRole).toLongLong());
  });
  curve_chart_->clear("Open a database and choose a run");
  derivative_chart_->clear(QString());
}

RunBrowser::~RunBrowser() = default;

int RunBrowser::run_count() const {
  return runs_->count();
}

Result<void> RunBrowser::set_store(store::RunStore* store) {
  store_ = store;
  current_.reset();
  runs_->clear();
  title_->clear();
  summary_->clear();
  note_->clear();
  curve_chart_->clear(store ? "Choose a run" : "Open a database and choose a run");
  derivative_chart_->clear(QString());
  return reload();
}

Result<void> RunBrowser::reload() {
  if (!store_)
    return {};
  auto runs = store_->list_runs();
  if (!runs)
    return runs.error();
  const auto keep = current_;
  QSignalBlocker quiet(runs_);
  runs_->clear();
  for (const auto& run : *runs) {
    auto* item = new QListWidgetItem(QString::fromStdString(run_list_label(run)));
    item->setData(kRunIdRole, QVariant::fromValue<qlonglong>(run.id));
    runs_->addItem(item);
    if (keep && run.id == *keep)
      runs_->setCurrentItem(item);
  }
  return {};
}

Result<void> RunBrowser::show_run(std::int64_t run_id) {
  for (int i = 0; i < runs_->count(); ++i) {
    QListWidgetItem* item = runs_->item(i);
    if (item->data(kRunIdRole).toLongLong() == run_id) {
      if (runs_->currentItem() == item)
        draw(run_id);
      else
        runs_->setCurrentItem(item);  // draws through currentItemChanged
      if (current_ != run_id)
        return make_error(ErrorKind::storage,
                          "run " + std::to_string(run_id) + " is listed but could not be drawn");
      return {};
    }
  }
  return make_error(ErrorKind::not_found, "no run " + std::to_string(run_id) +
                                              " in this database (it has " +
                                              std::to_string(runs_->count()) + " runs)");
}

void RunBrowser::draw(std::int64_t run_id) {
  if (!store_)
    return;
  auto plot = build_run_plot(*store_, run_id);
  if (!plot) {
    current_.reset();
    curve_chart_->clear("Run " + QString::number(run_id) + " cannot be shown");
    derivative_chart_->clear(QString());
    title_->setText("Run " + QString::number(run_id));
    summary_->setText(QString::fromStdString(plot.error().message));
    emit problem(QString::fromStdString(plot.error().describe()));
    return;
  }
  current_ = run_id;
  title_->setText(QString::fromStdString(plot->title));
  summary_->setText(QString::fromStdString(plot->summary));
  note_->setText(QString::fromStdString(plot->note));
  double x_min = 0.0, x_max = 1.0;
  if (!plot->curve.x.empty()) {
    x_min = *std::min_element(plot->curve.x.begin(), plot->curve.x.end());
    x_max = *std::max_element(plot->curve.x.begin(), plot->curve.x.end());
  }
  if (plot->curve.x.empty())
    curve_chart_->clear("Run " + QString::number(run_id) + " has no points");
  else
    curve_chart_->show(plot->curve, plot->endpoints, x_min, x_max, true);
  if (plot->derivative.x.empty())
    derivative_chart_->clear("No first derivative for this run");
  else
    derivative_chart_->show(plot->derivative, plot->endpoints, x_min, x_max, false);
}

}  // namespace veq::ui
