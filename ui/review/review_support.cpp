#include "ui/review/review_support.hpp"

#include <cmath>
#include <filesystem>

#include <QtWidgets/QDialog>
#include <QtWidgets/QDialogButtonBox>
#include <QtWidgets/QFormLayout>
#include <QtWidgets/QHeaderView>
#include <QtWidgets/QLineEdit>
#include <QtWidgets/QVBoxLayout>

#include "controller/audit/audit.hpp"
#include "controller/method/utc_time.hpp"

namespace veq::ui::review {

MessageLine::MessageLine(QWidget* parent) : QLabel(parent) {
  setWordWrap(true);
  setTextInteractionFlags(Qt::TextSelectableByMouse | Qt::TextSelectableByKeyboard);
  setObjectName("message_line");
}

void MessageLine::show_error(const Error& error) {
  show_error_text(QStringLiteral("Problem (%1): %2")
                      .arg(QString::fromUtf8(error_kind_name(error.kind)),
                           QString::fromStdString(error.message)));
}

void MessageLine::show_error_text(const QString& text) {
  error_ = true;
  setStyleSheet("QLabel { color: #8E0000; border: 1px solid #8E0000; padding: 3px; }");
  setText(text.startsWith("Problem") ? text : "Problem: " + text);
  emit problem(this->text());
}

void MessageLine::show_info(const QString& text) {
  error_ = false;
  setStyleSheet("QLabel { color: #1B3A1B; padding: 3px; }");
  setText(text);
}

CredentialsProvider dialog_credentials(QWidget* parent) {
  return [parent](const CredentialsRequest& request) -> std::optional<Credentials> {
    QDialog dialog(parent);
    dialog.setWindowTitle(request.title);
    auto* layout = new QVBoxLayout(&dialog);
    auto* explanation = new QLabel(request.explanation, &dialog);
    explanation->setWordWrap(true);
    layout->addWidget(explanation);
    auto* form = new QFormLayout();
    auto* user = new QLineEdit(&dialog);
    auto* password = new QLineEdit(&dialog);
    password->setEchoMode(QLineEdit::Password);
    form->addRow("&User name:", user);
    form->addRow("&Password:", password);
    QLineEdit* reason = nullptr;
    if (request.ask_reason) {
      reason = new QLineEdit(&dialog);
      form->addRow(request.reason_label.isEmpty() ? "&Reason:" : request.reason_label, reason);
    }
    layout->addLayout(form);
    auto* buttons = new QDialogButtonBox(QDialogButtonBox::Ok | QDialogButtonBox::Cancel, &dialog);
    QObject::connect(buttons, &QDialogButtonBox::accepted, &dialog, &QDialog::accept);
    QObject::connect(buttons, &QDialogButtonBox::rejected, &dialog, &QDialog::reject);
    layout->addWidget(buttons);
    if (dialog.exec() != QDialog::Accepted)
      return std::nullopt;
    Credentials c{user->text().toStdString(), password->text().toStdString(),
                  reason ? reason->text().toStdString() : std::string()};
    return c;
  };
}

bool store_has_users(store::SqliteStore& store) {
  std::error_code ignored;
  return std::filesystem::exists(controller::audit::default_key_path(store.path()), ignored);
}

Result<std::unique_ptr<store::AuditTrail>> open_audit_trail(store::SqliteStore& store) {
  const auto key = controller::audit::default_key_path(store.path());
  if (!store_has_users(store))
    return make_error(ErrorKind::not_found,
                      "this store has no users yet (no audit key at " + key.string() +
                          "): add the first administrator with `veq user add --db " + store.path() +
                          "`, then sign in here");
  return store::AuditTrail::open(store.path(), key.string(), false);
}

QString q(const std::string& text) {
  return QString::fromStdString(text);
}

QTableWidget* make_table(QWidget* parent, const QStringList& headers, const char* name) {
  auto* table = new QTableWidget(parent);
  table->setObjectName(name);
  table->setColumnCount(static_cast<int>(headers.size()));
  table->setHorizontalHeaderLabels(headers);
  table->setEditTriggers(QAbstractItemView::NoEditTriggers);
  table->setSelectionBehavior(QAbstractItemView::SelectRows);
  table->setSelectionMode(QAbstractItemView::SingleSelection);
  table->verticalHeader()->setVisible(false);
  table->horizontalHeader()->setStretchLastSection(true);
  table->setAlternatingRowColors(true);
  return table;
}

double epoch_ms(const std::string& iso_utc) {
  auto t = method::parse_utc(iso_utc);
  return t ? static_cast<double>(t->time_since_epoch().count()) : std::nan("");
}

QString fixed(double value, int decimals) {
  return QString::number(value, 'f', decimals);
}

QString significant(double value, int digits) {
  return QString::number(value, 'g', digits);
}

}  // namespace veq::ui::review
