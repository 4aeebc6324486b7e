// The method editor: the stored methods with their versions, the method
// file's text checked as it is typed (the first problem listed with its line
// and field, the line highlighted), saving as a new version (an
// administrator's name and password once the store has users, recorded in the
// audit trail), and a preview of the curve the chemistry engine predicts for
// the method's sample with its feasibility in words and numbers.
#pragma once

#include <memory>
#include <optional>
#include <string>

#include <QtWidgets/QWidget>

#include "common/result.hpp"
#include "controller/method/method.hpp"
#include "controller/store/sqlite_store.hpp"
#include "ui/review/review_support.hpp"

class QComboBox;
class QDoubleSpinBox;
class QLabel;
class QListWidget;
class QPlainTextEdit;
class QPushButton;
class QTimer;
class QTreeWidget;

namespace veq::ui::review {

class ReviewChart;

class MethodEditorView : public QWidget {
  Q_OBJECT

 public:
  explicit MethodEditorView(QWidget* parent = nullptr);
  ~MethodEditorView() override;

  /// Lists the store's methods (not owned; nullptr detaches and empties).
  Result<void> set_store(store::SqliteStore* store);
  /// Reads the list of methods and versions again.
  Result<void> reload();

  /// Puts a stored version (0: the latest) into the editor.
  Result<void> open_version(const std::string& name, int version = 0);
  /// Replaces the editor's text (as if typed; validation follows after the pause).
  void set_text(const QString& text);
  QString text() const;

  /// Validates the text now instead of after the typing pause.
  void validate_now();
  /// The problems listed, one per line ("line 12, field 'unit': ...").
  QStringList problems() const;
  /// The highlighted line (1-based), if a problem names one.
  std::optional<int> highlighted_line() const { return highlighted_line_; }
  /// The method parsed from the text, if it is valid.
  const std::optional<method::Method>& parsed() const { return parsed_; }

  /// Saves the text as the method's next version: asks for credentials when
  /// the store has users (through the provider), checks the role, stores,
  /// records the change in the audit trail. Returns the stored version.
  Result<int> save_new_version();
  /// Who answers the user-and-password question (a dialog by default).
  void set_credentials_provider(CredentialsProvider provider) {
    credentials_ = std::move(provider);
  }

  /// Computes the preview for the parsed method with the sample fields.
  Result<void> update_preview();
  /// The feasibility in words, as shown.
  QString preview_text() const;

  /// Milliseconds of typing pause before validation (350: after a word,
  /// not after every key; short enough to feel immediate).
  static constexpr int kValidationPauseMs = 350;

 signals:
  void problem(const QString& message);
  void method_saved(const QString& name, int version);

 private:
  void fill_sample_fields(const method::Method& m);
  void highlight_line(std::optional<int> line);

  store::SqliteStore* store_ = nullptr;
  CredentialsProvider credentials_;
  std::optional<method::Method> parsed_;
  std::optional<int> highlighted_line_;
  QString filled_for_;  ///< method name the sample fields were filled for

  QTreeWidget* versions_ = nullptr;
  QPlainTextEdit* editor_ = nullptr;
  QTimer* pause_ = nullptr;
  QListWidget* problems_ = nullptr;
  QLabel* verdict_ = nullptr;
  QPushButton* save_ = nullptr;
  QComboBox* metal_ = nullptr;
  QDoubleSpinBox* metal_mmol_per_l_ = nullptr;
  QDoubleSpinBox* sample_volume_ml_ = nullptr;
  QDoubleSpinBox* ph_ = nullptr;
  QDoubleSpinBox* ammonia_mol_per_l_ = nullptr;
  QDoubleSpinBox* titrant_mol_per_l_ = nullptr;
  QLabel* feasibility_ = nullptr;
  std::unique_ptr<ReviewChart> chart_;
  MessageLine* message_ = nullptr;
};

}  // namespace veq::ui::review
