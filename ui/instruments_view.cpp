#include "ui/instruments_view.hpp"

#include <cmath>

#include <QtCore/QSettings>
#include <QtCore/QTimer>
#include <QtWidgets/QCheckBox>
#include <QtWidgets/QComboBox>
#include <QtWidgets/QFileDialog>
#include <QtWidgets/QGridLayout>
#include <QtWidgets/QGroupBox>
#include <QtWidgets/QHBoxLayout>
#include <QtWidgets/QLabel>
#include <QtWidgets/QLineEdit>
#include <QtWidgets/QPushButton>
#include <QtWidgets/QVBoxLayout>

#include "ui/rack_worker.hpp"

namespace veq::ui {

namespace {

constexpr const char* kNativeProtocol = "veq native protocol";
constexpr const char* kChooseProfile = "Choose a profile file...";

QString role_key(int role) {
  return QString("instruments/") +
         QString(bench_role_name(static_cast<BenchRole>(role))).replace(' ', '_');
}

}  // namespace

InstrumentsView::InstrumentsView(RackWorker& worker, QWidget* parent)
    : QWidget(parent), worker_(worker) {
  auto* intro = new QLabel(
      "Give each instrument on the bench a connection string (serial:/dev/ttyUSB0?baud=9600, "
      "tcp:host:port) and, for an instrument that speaks its own commands, its device profile. "
      "Leave a role empty when the bench has no such device. \"simulated\" uses the demo rack "
      "in virtual time (all roles or none).");
  intro->setWordWrap(true);

  auto* grid = new QGridLayout();
  grid->addWidget(new QLabel("<b>Instrument</b>"), 0, 0);
  grid->addWidget(new QLabel("<b>Connection</b>"), 0, 1);
  grid->addWidget(new QLabel("<b>Device profile</b>"), 0, 2);
  grid->addWidget(new QLabel("<b>Answer</b>"), 0, 3);
  for (int i = 0; i < kBenchRoleCount; ++i) {
    const auto role = static_cast<BenchRole>(i);
    RoleRow& row = rows_[static_cast<std::size_t>(i)];
    auto* name = new QLabel(QString("&") + bench_role_name(role));
    row.connection = new QLineEdit();
    row.connection->setPlaceholderText("not on the bench");
    row.connection->setAccessibleName(QString(bench_role_name(role)) + " connection");
    name->setBuddy(row.connection);
    row.profile = new QComboBox();
    row.profile->addItem(kNativeProtocol, QString());
    row.profile->addItem(kChooseProfile, QString());
    row.profile->setAccessibleName(QString(bench_role_name(role)) + " device profile");
    connect(row.profile, qOverload<int>(&QComboBox::activated), this, [this, i](int index) {
      if (rows_[static_cast<std::size_t>(i)].profile->itemText(index) == kChooseProfile)
        choose_profile(i);
    });
    row.status = new QLabel("-");
    row.status->setWordWrap(true);
    row.status->setTextInteractionFlags(Qt::TextSelectableByMouse);
    grid->addWidget(name, i + 1, 0);
    grid->addWidget(row.connection, i + 1, 1);
    grid->addWidget(row.profile, i + 1, 2);
    grid->addWidget(row.status, i + 1, 3);
  }
  grid->setColumnStretch(1, 2);
  grid->setColumnStretch(3, 3);

  auto* simulated = new QPushButton("Use &simulated instruments");
  simulated->setToolTip("Every role on the demo rack of `veq demo`, in virtual time");
  connect(simulated, &QPushButton::clicked, this, &InstrumentsView::use_simulated);
  test_ = new QPushButton("&Connect and test (Ctrl+T)");
  test_->setShortcut(QKeySequence("Ctrl+T"));
  test_->setToolTip(
      "Opens every connection on the instrument thread and asks each device "
      "who it is");
  connect(test_, &QPushButton::clicked, this, &InstrumentsView::apply_and_test);
  rack_status_ = new QLabel("Not connected.");
  rack_status_->setWordWrap(true);
  auto* buttons = new QHBoxLayout();
  buttons->addWidget(simulated);
  buttons->addWidget(test_);
  buttons->addWidget(rack_status_, 1);

  auto* readings = new QGroupBox("Live readings of the electrode");
  auto* readings_layout = new QGridLayout(readings);
  live_ = new QCheckBox("&Live readings (once a second)");
  connect(live_, &QCheckBox::toggled, this, &InstrumentsView::set_live_readings);
  potential_ = new QLabel("- mV");
  temperature_ = new QLabel("- °C");
  ph_ = new QLabel("pH -");
  reading_note_ = new QLabel();
  reading_note_->setWordWrap(true);
  for (QLabel* l : {potential_, temperature_, ph_}) {
    QFont f = l->font();
    f.setPointSizeF(f.pointSizeF() * 1.6);
    l->setFont(f);
  }
  readings_layout->addWidget(live_, 0, 0, 1, 3);
  readings_layout->addWidget(potential_, 1, 0);
  readings_layout->addWidget(temperature_, 1, 1);
  readings_layout->addWidget(ph_, 1, 2);
  readings_layout->addWidget(reading_note_, 2, 0, 1, 3);

  auto* layout = new QVBoxLayout(this);
  layout->addWidget(intro);
  layout->addLayout(grid);
  layout->addLayout(buttons);
  layout->addWidget(readings);
  layout->addStretch(1);

  timer_ = new QTimer(this);
  timer_->setInterval(kReadingIntervalMs);
  connect(timer_, &QTimer::timeout, this,
          [this] { worker_.read_sensor(kReadingIntervalMs / 1000.0); });

  connect(&worker_, &RackWorker::rack_opened, this,
          [this](bool ok, const QString& message, bool simulated_rack) {
            rack_status_->setText(message);
            simulated_ = ok && simulated_rack;
            if (!ok) {
              test_after_open_ = false;
              emit problem(message);
              return;
            }
            emit rack_ready(simulated_rack);
            if (test_after_open_) {
              test_after_open_ = false;
              worker_.test_connections();
            }
          });
  connect(&worker_, &RackWorker::role_answered, this,
          [this](int role, bool ok, const QString& text) {
            QLabel* status = rows_[static_cast<std::size_t>(role)].status;
            status->setText((ok ? "answers: " : "no answer: ") + text);
            status->setStyleSheet(ok ? "color: #1b5e20;" : "color: #b71c1c;");
          });
  connect(&worker_, &RackWorker::connections_tested, this,
          [this] { rack_status_->setText(rack_status_->text() + "; connections tested"); });
  connect(&worker_, &RackWorker::sensor_read, this,
          [this](double mv, double temperature_c, double ph, double clock_s) {
            potential_->setText(QString::number(mv, 'f', 1) + " mV");
            temperature_->setText(QString::number(temperature_c, 'f', 1) + " °C");
            ph_->setText(std::isnan(ph) ? "pH not reported" : "pH " + QString::number(ph, 'f', 2));
            reading_note_->setText(QString("read at %1 s of the rack's clock%2")
                                       .arg(clock_s, 0, 'f', 0)
                                       .arg(simulated_ ? " (virtual time)" : ""));
          });
  connect(&worker_, &RackWorker::sensor_failed, this,
          [this](const QString& message) { reading_note_->setText("no reading: " + message); });
}

RackSettings InstrumentsView::settings() const {
  RackSettings s;
  for (int i = 0; i < kBenchRoleCount; ++i) {
    const RoleRow& row = rows_[static_cast<std::size_t>(i)];
    s.roles[static_cast<std::size_t>(i)].connection =
        row.connection->text().trimmed().toStdString();
    s.roles[static_cast<std::size_t>(i)].profile_path =
        row.profile->currentData().toString().toStdString();
  }
  return s;
}

void InstrumentsView::set_settings(const RackSettings& s) {
  for (int i = 0; i < kBenchRoleCount; ++i) {
    const RoleRow& row = rows_[static_cast<std::size_t>(i)];
    const auto& c = s.roles[static_cast<std::size_t>(i)];
    row.connection->setText(QString::fromStdString(c.connection));
    if (c.profile_path.empty()) {
      row.profile->setCurrentIndex(0);
    } else {
      const QString path = QString::fromStdString(c.profile_path);
      int index = row.profile->findData(path);
      if (index < 0) {
        row.profile->insertItem(1, path, path);
        index = 1;
      }
      row.profile->setCurrentIndex(index);
    }
  }
}

void InstrumentsView::use_simulated() {
  set_settings(RackSettings::all_simulated());
}

void InstrumentsView::apply_and_test() {
  if (worker_.busy()) {
    rack_status_->setText(
        "A series or a weighing is running: the instruments change only "
        "after it ends (or is aborted on the Series view).");
    return;
  }
  for (auto& row : rows_) {
    row.status->setText("asking...");
    row.status->setStyleSheet(QString());
  }
  rack_status_->setText("Opening the connections...");
  test_after_open_ = true;
  worker_.open(settings());
}

void InstrumentsView::set_live_readings(bool on) {
  if (live_->isChecked() != on)
    live_->setChecked(on);  // comes back here through toggled
  if (on && !timer_->isActive()) {
    worker_.read_sensor(0.0);
    timer_->start();
  } else if (!on) {
    timer_->stop();
  }
}

QString InstrumentsView::role_status(BenchRole role) const {
  return rows_[static_cast<std::size_t>(role)].status->text();
}

QString InstrumentsView::reading_text() const {
  return potential_->text() + ", " + temperature_->text() + ", " + ph_->text();
}

void InstrumentsView::choose_profile(int role) {
  RoleRow& row = rows_[static_cast<std::size_t>(role)];
  const QString path = QFileDialog::getOpenFileName(
      this, QString("Device profile for the ") + bench_role_name(static_cast<BenchRole>(role)),
      QString(), "Device profiles (*.profile);;All files (*)");
  if (path.isEmpty()) {
    row.profile->setCurrentIndex(0);
    return;
  }
  int index = row.profile->findData(path);
  if (index < 0) {
    row.profile->insertItem(1, path, path);
    index = 1;
  }
  row.profile->setCurrentIndex(index);
}

void InstrumentsView::save(QSettings& settings) const {
  const RackSettings s = this->settings();
  for (int i = 0; i < kBenchRoleCount; ++i) {
    const auto& c = s.roles[static_cast<std::size_t>(i)];
    settings.setValue(role_key(i) + "/connection", QString::fromStdString(c.connection));
    settings.setValue(role_key(i) + "/profile", QString::fromStdString(c.profile_path));
  }
}

void InstrumentsView::restore(QSettings& settings) {
  RackSettings s;
  for (int i = 0; i < kBenchRoleCount; ++i) {
    auto& c = s.roles[static_cast<std::size_t>(i)];
    c.connection = settings.value(role_key(i) + "/connection").toString().toStdString();
    c.profile_path = settings.value(role_key(i) + "/profile").toString().toStdString();
  }
  set_settings(s);
}

}  // namespace veq::ui
