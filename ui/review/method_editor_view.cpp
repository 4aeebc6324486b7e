#include "ui/review/method_editor_view.hpp"

#include <map>
#include <regex>

#include <QtCore/QTimer>
#include <QtGui/QFontDatabase>
#include <QtGui/QTextBlock>
#include <QtWidgets/QComboBox>
#include <QtWidgets/QDoubleSpinBox>
#include <QtWidgets/QFormLayout>
#include <QtWidgets/QGroupBox>
#include <QtWidgets/QHBoxLayout>
#include <QtWidgets/QHeaderView>
#include <QtWidgets/QLabel>
#include <QtWidgets/QListWidget>
#include <QtWidgets/QPlainTextEdit>
#include <QtWidgets/QPushButton>
#include <QtWidgets/QSplitter>
#include <QtWidgets/QTreeWidget>
#include <QtWidgets/QVBoxLayout>

#include "chemistry/constants.hpp"
#include "chemistry/prediction.hpp"
#include "controller/audit/audit.hpp"
#include "controller/method/method_file.hpp"
#include "controller/method/stored_methods.hpp"
#include "ui/review/review_chart.hpp"
#include "ui/review/review_logic.hpp"

namespace veq::ui::review {

namespace {

/// The constants library's name of a metal from a method's analyte ("calcium"
/// -> "Ca"); the analyte itself when it already is a library name.
QString library_metal(const std::string& analyte) {
  static const std::map<std::string, const char*> names = {
      {"magnesium", "Mg"}, {"calcium", "Ca"},   {"strontium", "Sr"}, {"barium", "Ba"},
      {"manganese", "Mn"}, {"iron", "Fe(III)"}, {"cobalt", "Co"},    {"nickel", "Ni"},
      {"copper", "Cu"},    {"zinc", "Zn"},      {"cadmium", "Cd"},   {"mercury", "Hg"},
      {"lead", "Pb"},      {"aluminium", "Al"}, {"aluminum", "Al"},  {"hardness", "Ca"}};
  std::string key = analyte;
  for (auto& c : key)
    c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  for (const auto& [word, symbol] : names)
    if (key.find(word) != std::string::npos)
      return symbol;
  return QString::fromStdString(analyte);
}

/// The concentration a titrant's name states ("EDTA 0.01 mol/L" -> 0.01).
std::optional<double> conc_in_name(const std::string& name) {
  static const std::regex pattern(R"(([0-9]*\.?[0-9]+)\s*mol/L)");
  std::smatch match;
  if (std::regex_search(name, match, pattern))
    return std::stod(match[1].str());
  return std::nullopt;
}

QDoubleSpinBox* spin(QWidget* parent, double lo, double hi, int decimals, double value,
                     const QString& unit) {
  auto* box = new QDoubleSpinBox(parent);
  box->setRange(lo, hi);
  box->setDecimals(decimals);
  box->setValue(value);
  box->setSuffix(unit.isEmpty() ? QString() : " " + unit);
  box->setKeyboardTracking(false);
  return box;
}

QString windows_text(const std::vector<std::pair<double, double>>& windows) {
  if (windows.empty())
    return "none";
  QStringList parts;
  for (const auto& [lo, hi] : windows)
    parts << QStringLiteral("pH %1 to %2").arg(fixed(lo, 1), fixed(hi, 1));
  return parts.join(", ");
}

}  // namespace

MethodEditorView::MethodEditorView(QWidget* parent)
    : QWidget(parent), credentials_(dialog_credentials(this)) {
  auto* outer = new QVBoxLayout(this);
  auto* splitter = new QSplitter(Qt::Horizontal, this);
  outer->addWidget(splitter, 1);

  // Stored methods and their versions.
  auto* left = new QGroupBox("Stored methods", splitter);
  auto* left_layout = new QVBoxLayout(left);
  versions_ = new QTreeWidget(left);
  versions_->setObjectName("method_versions");
  versions_->setHeaderLabels({"method / version", "stored", "state"});
  versions_->header()->setSectionResizeMode(QHeaderView::ResizeToContents);
  left_layout->addWidget(versions_);
  auto* open = new QPushButton("&Open in editor", left);
  left_layout->addWidget(open);
  connect(open, &QPushButton::clicked, this, [this] {
    auto* item = versions_->currentItem();
    if (item == nullptr)
      return;
    const std::string name = item->data(0, Qt::UserRole).toString().toStdString();
    const int version = item->data(0, Qt::UserRole + 1).toInt();
    if (auto r = open_version(name, version); !r)
      message_->show_error(r.error());
  });
  connect(versions_, &QTreeWidget::itemActivated, open, &QPushButton::click);

  // The editor and its problems.
  auto* middle = new QGroupBox("Method file", splitter);
  auto* middle_layout = new QVBoxLayout(middle);
  editor_ = new QPlainTextEdit(middle);
  editor_->setObjectName("method_text");
  editor_->setFont(QFontDatabase::systemFont(QFontDatabase::FixedFont));
  editor_->setLineWrapMode(QPlainTextEdit::NoWrap);
  editor_->setTabChangesFocus(true);  // Tab moves on: the keyboard alone gets everywhere
  middle_layout->addWidget(editor_, 1);
  verdict_ = new QLabel(middle);
  verdict_->setWordWrap(true);
  middle_layout->addWidget(verdict_);
  problems_ = new QListWidget(middle);
  problems_->setObjectName("method_problems");
  problems_->setMaximumHeight(80);
  middle_layout->addWidget(problems_);
  save_ = new QPushButton("&Save as new version", middle);
  save_->setEnabled(false);
  middle_layout->addWidget(save_);
  connect(save_, &QPushButton::clicked, this, [this] {
    if (auto r = save_new_version(); !r)
      message_->show_error(r.error());
  });

  pause_ = new QTimer(this);
  pause_->setSingleShot(true);
  pause_->setInterval(kValidationPauseMs);
  connect(editor_, &QPlainTextEdit::textChanged, pause_, qOverload<>(&QTimer::start));
  connect(pause_, &QTimer::timeout, this, &MethodEditorView::validate_now);
  connect(problems_, &QListWidget::itemActivated, this, [this] {
    if (highlighted_line_) {
      QTextCursor cursor(editor_->document()->findBlockByNumber(*highlighted_line_ - 1));
      editor_->setTextCursor(cursor);
      editor_->setFocus();
    }
  });

  // The preview.
  auto* right = new QGroupBox("Predicted curve of the method's sample", splitter);
  auto* right_layout = new QVBoxLayout(right);
  auto* form = new QFormLayout();
  metal_ = new QComboBox(right);
  if (auto library = chemistry::builtin_constants_library())
    for (const auto& m : library->metals)
      metal_->addItem(QString::fromStdString(m.name));
  metal_mmol_per_l_ = spin(right, 0.001, 1000.0, 3, 1.0, "mmol/L");
  sample_volume_ml_ = spin(right, 0.1, 1000.0, 2, 50.0, "mL");
  ph_ = spin(right, 1.0, 13.5, 2, 10.0, "");
  ammonia_mol_per_l_ = spin(right, 0.0, 5.0, 3, 0.1, "mol/L");
  titrant_mol_per_l_ = spin(right, 0.0001, 1.0, 5, 0.01, "mol/L");
  form->addRow("&Metal:", metal_);
  form->addRow("Metal &concentration:", metal_mmol_per_l_);
  form->addRow("Sample &volume:", sample_volume_ml_);
  form->addRow("p&H (buffered):", ph_);
  form->addRow("&Ammonia buffer total:", ammonia_mol_per_l_);
  form->addRow("&EDTA titrant:", titrant_mol_per_l_);
  right_layout->addLayout(form);
  auto* predict = new QPushButton("&Predict", right);
  right_layout->addWidget(predict);
  connect(predict, &QPushButton::clicked, this, [this] {
    if (auto r = update_preview(); !r)
      message_->show_error(r.error());
  });
  chart_ = std::make_unique<ReviewChart>(right);
  right_layout->addWidget(chart_->widget(), 1);
  feasibility_ = new QLabel(right);
  feasibility_->setObjectName("feasibility");
  feasibility_->setWordWrap(true);
  feasibility_->setTextInteractionFlags(Qt::TextSelectableByMouse);
  right_layout->addWidget(feasibility_);

  splitter->setStretchFactor(0, 1);
  splitter->setStretchFactor(1, 3);
  splitter->setStretchFactor(2, 3);
  splitter->setSizes({230, 420, 520});

  message_ = new MessageLine(this);
  outer->addWidget(message_);
  connect(message_, &MessageLine::problem, this, &MethodEditorView::problem);
  chart_->clear("no prediction yet");
  verdict_->setText("No method text yet: open a stored version or type one.");
}

MethodEditorView::~MethodEditorView() = default;

Result<void> MethodEditorView::set_store(store::SqliteStore* store) {
  store_ = store;
  return reload();
}

Result<void> MethodEditorView::reload() {
  versions_->clear();
  if (store_ == nullptr)
    return {};
  auto names = store_->list_method_names();
  if (!names) {
    message_->show_error(names.error());
    return names.error();
  }
  for (const auto& name : *names) {
    auto list = store_->list_method_versions(name);
    if (!list) {
      message_->show_error(list.error());
      return list.error();
    }
    auto* top = new QTreeWidgetItem(versions_);
    top->setText(0, QString::fromStdString(name));
    top->setText(2, QStringLiteral("%1 version(s)").arg(list->size()));
    top->setData(0, Qt::UserRole, QString::fromStdString(name));
    top->setData(0, Qt::UserRole + 1, 0);
    for (const auto& v : *list) {
      auto* child = new QTreeWidgetItem(top);
      child->setText(0, QStringLiteral("version %1").arg(v.version));
      child->setText(1, QString::fromStdString(readable_utc(v.created_utc)));
      // Used versions are fixed: the words say so, not only the icon-less list.
      child->setText(2, v.used ? "used by runs (fixed)" : "draft (not used yet)");
      child->setData(0, Qt::UserRole, QString::fromStdString(name));
      child->setData(0, Qt::UserRole + 1, v.version);
    }
    top->setExpanded(true);
  }
  return {};
}

Result<void> MethodEditorView::open_version(const std::string& name, int version) {
  if (store_ == nullptr)
    return make_error(ErrorKind::invalid_input, "no store is open");
  auto record = store_->load_method_version(name, version);
  if (!record) {
    message_->show_error(record.error());
    return record.error();
  }
  set_text(QString::fromStdString(record->text));
  validate_now();
  message_->show_info(QStringLiteral("Opened '%1' version %2.")
                          .arg(QString::fromStdString(name))
                          .arg(record->version));
  return {};
}

void MethodEditorView::set_text(const QString& text) {
  editor_->setPlainText(text);
}

QString MethodEditorView::text() const {
  return editor_->toPlainText();
}

QStringList MethodEditorView::problems() const {
  QStringList list;
  for (int i = 0; i < problems_->count(); ++i)
    list << problems_->item(i)->text();
  return list;
}

void MethodEditorView::highlight_line(std::optional<int> line) {
  highlighted_line_ = line;
  QList<QTextEdit::ExtraSelection> selections;
  if (line) {
    QTextEdit::ExtraSelection selection;
    selection.format.setBackground(QColor(0xFFCDD2));
    selection.format.setProperty(QTextFormat::FullWidthSelection, true);
    selection.cursor = QTextCursor(editor_->document()->findBlockByNumber(*line - 1));
    selections << selection;
  }
  editor_->setExtraSelections(selections);
}

void MethodEditorView::validate_now() {
  pause_->stop();
  problems_->clear();
  const std::string text = editor_->toPlainText().toStdString();
  auto m = method::parse_method(text, "method text");
  if (!m) {
    parsed_.reset();
    save_->setEnabled(false);
    const auto line = error_line(m.error().message);
    highlight_line(line);
    // The parser stops at the first problem: list it, say that more may follow.
    problems_->addItem(QString::fromStdString(m.error().message));
    verdict_->setText(line ? QStringLiteral("Not valid: the problem at line %1 is highlighted "
                                            "(fix it to see whether more follow).")
                                 .arg(*line)
                           : QStringLiteral("Not valid (see below)."));
    return;
  }
  highlight_line(std::nullopt);
  parsed_ = std::move(m).value();
  save_->setEnabled(store_ != nullptr);
  verdict_->setText(QStringLiteral("Valid: '%1', %2 step(s), result in %3.")
                        .arg(QString::fromStdString(parsed_->name))
                        .arg(parsed_->steps.size())
                        .arg(QString::fromStdString(parsed_->result.unit)));
  if (filled_for_ != QString::fromStdString(parsed_->name))
    fill_sample_fields(*parsed_);
  if (auto r = update_preview(); !r)
    message_->show_error(r.error());
}

void MethodEditorView::fill_sample_fields(const method::Method& m) {
  filled_for_ = QString::fromStdString(m.name);
  const int index = metal_->findText(library_metal(m.result.analyte));
  if (index >= 0)
    metal_->setCurrentIndex(index);
  for (const auto& step : m.steps)
    if (const auto* adjust = std::get_if<method::AdjustPhStep>(&step))
      ph_->setValue(adjust->target_ph);
  if (!m.titrants.empty()) {
    std::optional<double> conc;
    if (store_ != nullptr)
      if (auto t = store_->load_titrant(m.titrants.front().name); t)
        conc = t->nominal_conc_mol_per_l;
    if (!conc)
      conc = conc_in_name(m.titrants.front().name);
    if (conc)
      titrant_mol_per_l_->setValue(*conc);
  }
  // The middle of the method's acceptance range is the sample it expects.
  if (m.result.lowest && m.result.highest && m.result.unit == "mmol/L")
    metal_mmol_per_l_->setValue(0.5 * (*m.result.lowest + *m.result.highest));
}

Result<void> MethodEditorView::update_preview() {
  if (!parsed_) {
    chart_->clear("no valid method: no prediction");
    feasibility_->setText("The preview needs a valid method.");
    return {};
  }
  auto library = chemistry::builtin_constants_library();
  if (!library)
    return library.error();
  chemistry::SampleComposition sample;
  sample.sample_volume_ml = sample_volume_ml_->value();
  sample.metals.push_back(
      {metal_->currentText().toStdString(), metal_mmol_per_l_->value() / 1000.0});
  sample.ph = ph_->value();
  if (ammonia_mol_per_l_->value() > 0.0)
    sample.ligands.push_back({"ammonia", ammonia_mol_per_l_->value(), 0.0});
  sample.titrant.conc_mol_per_l = titrant_mol_per_l_->value();
  auto prediction = chemistry::predict(*library, sample);
  if (!prediction) {
    chart_->clear("no prediction");
    feasibility_->setText("No prediction: " + QString::fromStdString(prediction.error().message));
    return prediction.error();
  }
  ChartContent content;
  content.title = QStringLiteral("%1 by EDTA, predicted").arg(metal_->currentText());
  content.x_title = "EDTA added (mL)";
  content.y_title = QString::fromStdString(prediction->signal_label);
  ChartLine line;
  line.label = QString::fromStdString(prediction->signal_label) + " predicted";
  for (const auto& p : prediction->curve) {
    line.x.push_back(p.volume_ml);
    line.y.push_back(p.signal);
  }
  content.lines.push_back(std::move(line));
  QStringList words;
  for (const auto& b : prediction->breaks) {
    content.verticals.push_back(
        ChartRule{QStringLiteral("equivalence %1 mL").arg(fixed(b.equivalence_volume_ml, 3)),
                  b.equivalence_volume_ml, 0xC62828, ChartLine::Style::dashed});
    words << QStringLiteral(
                 "Equivalence point of %1 at %2 mL; p%1 rises by %3 between 99 % "
                 "and 101 % of it.")
                 .arg(QString::fromStdString(b.metal), fixed(b.equivalence_volume_ml, 3),
                      fixed(b.p_metal_jump, 2));
  }
  for (const auto& m : prediction->feasibility.metals) {
    words << QStringLiteral(
                 "%1 at pH %2: log10 K' = %3 L/mol, log10(C K') = %4: %5. Estimated "
                 "titration error %6 %. pH range where it is sharp: %7.")
                 .arg(QString::fromStdString(m.metal), fixed(ph_->value(), 2),
                      fixed(m.conditional.log10_conditional, 2), fixed(m.log10_ck, 2),
                      m.sharp ? "SHARP enough" : "NOT sharp enough",
                      significant(m.estimated_error_percent, 2), windows_text(m.ph_windows));
  }
  words << "Criterion: " + QString::fromStdString(prediction->feasibility.criterion);
  if (parsed_) {
    for (const auto& step : parsed_->steps)
      if (std::holds_alternative<method::BackTitrateStep>(step)) {
        words << "This method titrates back: the preview shows the direct titration of its "
                 "analyte, which tells whether the metal-EDTA complex is strong enough.";
        break;
      }
  }
  chart_->show(content);
  feasibility_->setText(words.join("\n"));
  return {};
}

QString MethodEditorView::preview_text() const {
  return feasibility_->text();
}

Result<int> MethodEditorView::save_new_version() {
  if (store_ == nullptr)
    return make_error(ErrorKind::invalid_input, "no store is open: nothing to save into");
  validate_now();
  if (!parsed_) {
    const QStringList list = problems();
    auto error = make_error(ErrorKind::invalid_input,
                            "the method text is not valid, so it was not saved: " +
                                (list.isEmpty() ? std::string() : list.front().toStdString()));
    message_->show_error(error);
    return error;
  }
  // Once a store has users, only an administrator changes methods, and the
  // change is recorded (the same rule as `veq method import`).
  std::unique_ptr<store::AuditTrail> trail;
  Credentials who;
  if (store_has_users(*store_)) {
    auto answer = credentials_(CredentialsRequest{
        "Save method '" + QString::fromStdString(parsed_->name) + "'",
        "Only an administrator may store a new method version. Your name, password and the "
        "reason are recorded in the audit trail.",
        true, "&Reason for the change:"});
    if (!answer) {
      message_->show_info("Saving cancelled: nothing stored.");
      return make_error(ErrorKind::aborted, "saving cancelled");
    }
    who = *answer;
    auto opened = open_audit_trail(*store_);
    if (!opened) {
      message_->show_error(opened.error());
      return opened.error();
    }
    trail = std::move(opened).value();
    auto role = trail->authenticate(who.user, who.password);
    if (!role) {
      message_->show_error(role.error());
      return role.error();
    }
    if (!controller::audit::allowed(*role, controller::audit::Permission::change_methods)) {
      auto error = make_error(ErrorKind::invalid_input,
                              who.user + " is a " + controller::audit::role_name(*role) +
                                  ": only an administrator may change methods");
      message_->show_error(error);
      return error;
    }
  }
  auto before = store_->list_method_versions(parsed_->name);
  const int previous = before && !before->empty() ? before->back().version : 0;
  auto saved = method::save_method(*store_, *parsed_);
  if (!saved) {
    message_->show_error(saved.error());
    return saved.error();
  }
  if (saved->version == previous) {
    message_->show_info(QStringLiteral("Unchanged: '%1' stays at version %2.")
                            .arg(QString::fromStdString(saved->name))
                            .arg(saved->version));
    return saved->version;
  }
  if (trail) {
    auto recorded = trail->append(who.user, "change method", "method '" + saved->name + "'",
                                  previous > 0 ? "version " + std::to_string(previous) : "none",
                                  "version " + std::to_string(saved->version), who.reason);
    if (!recorded) {
      auto error =
          make_error(recorded.error().kind,
                     "method stored as version " + std::to_string(saved->version) +
                         " but not recorded in the audit trail: " + recorded.error().message);
      message_->show_error(error);
      return error;
    }
  }
  (void)reload();
  message_->show_info(
      QStringLiteral("Stored '%1' as version %2%3.")
          .arg(QString::fromStdString(saved->name))
          .arg(saved->version)
          .arg(trail ? " (recorded in the audit trail)" : " (store without users)"));
  emit method_saved(QString::fromStdString(saved->name), saved->version);
  return saved->version;
}

}  // namespace veq::ui::review
