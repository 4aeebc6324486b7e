// What the review views share: the message line that shows every error the
// controller reports, the user-and-password question asked before a signed
// action, the audit trail of a store, and number formatting with units.
#pragma once

#include <functional>
#include <memory>
#include <optional>
#include <string>

#include <QtCore/QString>
#include <QtCore/QStringList>
#include <QtWidgets/QLabel>
#include <QtWidgets/QTableWidget>

#include "common/result.hpp"
#include "controller/store/audit_trail.hpp"
#include "controller/store/sqlite_store.hpp"

namespace veq::ui::review {

/// One line under a view: errors in words (with a dark red frame, but the
/// words "Problem:" say it too), information in plain text.
class MessageLine : public QLabel {
  Q_OBJECT

 public:
  explicit MessageLine(QWidget* parent = nullptr);
  /// Shows the error's kind and message: "Problem (storage error): ...".
  void show_error(const Error& error);
  void show_error_text(const QString& text);
  void show_info(const QString& text);
  bool showing_error() const { return error_; }

 signals:
  void problem(const QString& message);

 private:
  bool error_ = false;
};

/// What a signed action asks for.
struct CredentialsRequest {
  QString title;        ///< "Sign off run 3"
  QString explanation;  ///< what signing means here
  bool ask_reason = false;
  QString reason_label;  ///< "Reason for choosing this evaluation"
};

struct Credentials {
  std::string user;
  std::string password;
  std::string reason;
};

/// Asks for a user name and password (and a reason when asked); nothing
/// when the user cancels. The views use a dialog; tests give their own.
using CredentialsProvider = std::function<std::optional<Credentials>(const CredentialsRequest&)>;

/// The modal dialog: user, password (hidden), reason.
CredentialsProvider dialog_credentials(QWidget* parent);

/// Opens the audit trail of `store`'s file with the key beside it (or
/// $VEQ_AUDIT_KEY). A store without a key file has no users yet: the error
/// then says how to add the first one.
Result<std::unique_ptr<store::AuditTrail>> open_audit_trail(store::SqliteStore& store);

/// Whether `store` has users (its audit key exists).
bool store_has_users(store::SqliteStore& store);

/// A number with a fixed count of decimals ("10.002").
/// The store's UTF-8 text as a QString.
QString q(const std::string& text);
/// A read-only table with one selected row at a time and the given headers.
QTableWidget* make_table(QWidget* parent, const QStringList& headers, const char* name);
/// Milliseconds since 1970 of the store's ISO 8601 UTC text (NaN if unreadable).
double epoch_ms(const std::string& iso_utc);

QString fixed(double value, int decimals);
/// A number with significant digits ("0.009852").
QString significant(double value, int digits);

}  // namespace veq::ui::review
