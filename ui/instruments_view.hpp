// The Instruments view: how each role on the bench is reached (a connection
// string, or the simulated demo rack), which device profile it speaks,
// a test of every connection (on the worker thread), and live readings of
// the electrode.
#pragma once

#include <array>

#include <QtWidgets/QWidget>

#include "ui/rack.hpp"

class QCheckBox;
class QComboBox;
class QLabel;
class QLineEdit;
class QPushButton;
class QSettings;
class QTimer;

namespace veq::ui {

class RackWorker;

class InstrumentsView : public QWidget {
  Q_OBJECT

 public:
  /// Live readings are asked for this often (ms): once a second is how a
  /// meter's display refreshes, and leaves the line free.
  static constexpr int kReadingIntervalMs = 1000;

  explicit InstrumentsView(RackWorker& worker, QWidget* parent = nullptr);

  /// The connections as typed.
  RackSettings settings() const;
  void set_settings(const RackSettings& settings);
  /// Fills every role with "simulated".
  void use_simulated();
  /// Opens the instruments on the worker, then asks each who it is.
  void apply_and_test();
  /// Starts or stops live readings of the electrode.
  void set_live_readings(bool on);
  bool simulated() const { return simulated_; }
  /// The status text of a role ("answers: ..." or the error).
  QString role_status(BenchRole role) const;
  QString reading_text() const;

  void save(QSettings& settings) const;
  void restore(QSettings& settings);

 signals:
  /// Instruments were opened (simulated: the demo rack).
  void rack_ready(bool simulated);
  void problem(const QString& message);

 private:
  struct RoleRow {
    QLineEdit* connection = nullptr;
    QComboBox* profile = nullptr;
    QLabel* status = nullptr;
  };
  void choose_profile(int role);

  RackWorker& worker_;
  std::array<RoleRow, kBenchRoleCount> rows_;
  QLabel* rack_status_ = nullptr;
  QLabel* potential_ = nullptr;
  QLabel* temperature_ = nullptr;
  QLabel* ph_ = nullptr;
  QLabel* reading_note_ = nullptr;
  QCheckBox* live_ = nullptr;
  QPushButton* test_ = nullptr;
  QTimer* timer_ = nullptr;
  bool simulated_ = false;
  bool test_after_open_ = false;
};

}  // namespace veq::ui
