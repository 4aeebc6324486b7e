#include "ui/report/pdf_report.hpp"

#include <sys/stat.h>
#include <unistd.h>
#include <QtCore/QBuffer>
#include <QtCore/QByteArray>
#include <QtCore/QSaveFile>
#include <QtGui/QFont>
#include <QtGui/QFontMetricsF>
#include <QtGui/QGuiApplication>
#include <QtGui/QPageLayout>
#include <QtGui/QPageSize>
#include <QtGui/QPainter>
#include <QtGui/QPainterPath>
#include <QtGui/QPdfWriter>
#include <QtGui/QPen>

#include <algorithm>
#include <cerrno>
#include <cmath>
#include <cstdio>
#include <string>
#include <utility>
#include <vector>

namespace veq::report {

namespace {

QString q(const std::string& s) {
  return QString::fromStdString(s);
}

std::string fixed(double value, int decimals) {
  char text[64];
  std::snprintf(text, sizeof text, "%.*f", decimals, value);
  return text;
}

/// Results and budgets print 6 significant digits: more than any titration
/// resolves, so rounding never hides a difference the lab could see.
std::string significant(double value, int digits = 6) {
  char text[64];
  std::snprintf(text, sizeof text, "%.*g", digits, value);
  return text;
}

/// A "nice" tick step (1, 2 or 5 times a power of ten) for about `count`
/// intervals over `range`.
double tick_step(double range, int count) {
  const double raw = range / count;
  const double power = std::pow(10.0, std::floor(std::log10(raw)));
  const double f = raw / power;
  const double nice = f < 1.5 ? 1.0 : f < 3.0 ? 2.0 : f < 7.0 ? 5.0 : 10.0;
  return nice * power;
}

int tick_decimals(double step) {
  return std::max(0, static_cast<int>(-std::floor(std::log10(step) + 1e-9)));
}

struct Column {
  std::string title;
  double width_mm = 20.0;
  bool right = false;  ///< numbers align right
};

/// Draws pages top to bottom on an A4 PDF, starting a new page when the next
/// block does not fit, with a footer on every page.
class Pages {
 public:
  Pages(QPdfWriter& writer, std::string footer)
      : writer_(writer), painter_(&writer), footer_(std::move(footer)) {
    dots_per_mm_ = writer.resolution() / 25.4;
    width_ = writer.width();
    bottom_ = writer.height() - mm(8.0);  // room for the footer
    painter_.setRenderHint(QPainter::Antialiasing);
    draw_footer();
  }
  bool ok() const { return painter_.isActive(); }
  void finish() { painter_.end(); }
  void set_footer(std::string footer) { footer_ = std::move(footer); }

  double mm(double v) const { return v * dots_per_mm_; }
  QPainter& painter() { return painter_; }
  double width() const { return width_; }

  void new_page() {
    writer_.newPage();
    ++page_;
    y_ = 0.0;
    draw_footer();
  }
  void ensure(double height) {
    if (y_ + height > bottom_ && y_ > 0.0)
      new_page();
  }
  void space(double v_mm) { y_ += mm(v_mm); }

  QFont font(double points, bool bold = false) const {
    QFont f("DejaVu Sans");
    f.setPointSizeF(points);
    f.setBold(bold);
    // No ligatures: "fi" stays two letters, so the PDF's text can be
    // searched and copied as it reads.
    f.setStyleStrategy(QFont::PreferNoShaping);
    return f;
  }

  void title(const std::string& text) {
    paragraph(text, 16.0, true);
    space(1.0);
  }
  void heading(const std::string& text) {
    ensure(mm(32.0));  // never a heading alone at the foot of a page
    space(3.0);
    paragraph(text, 11.5, true);
    painter_.setPen(QPen(QColor(120, 120, 120), mm(0.2)));
    painter_.drawLine(QPointF(0, y_), QPointF(width_, y_));
    space(1.5);
  }
  /// Wrapped text; `anywhere` wraps inside long words (JSON options).
  void paragraph(const std::string& text, double points = 9.0, bool bold = false,
                 bool anywhere = false) {
    const QFont f = font(points, bold);
    painter_.setFont(f);
    painter_.setPen(Qt::black);
    const int flags =
        Qt::AlignLeft | Qt::AlignTop | (anywhere ? Qt::TextWrapAnywhere : Qt::TextWordWrap);
    QRectF bound = painter_.boundingRect(QRectF(0, 0, width_, 1e6), flags, q(text));
    ensure(bound.height());
    painter_.drawText(QRectF(0, y_, width_, bound.height()), flags, q(text));
    y_ += bound.height();
  }
  /// Label and value pairs in two columns of a grid.
  void key_values(const std::vector<std::pair<std::string, std::string>>& rows) {
    const QFont label = font(9.0, true), value = font(9.0);
    const double label_w = mm(38.0);
    const int flags = Qt::AlignLeft | Qt::AlignTop | Qt::TextWordWrap;
    for (const auto& [k, v] : rows) {
      painter_.setFont(value);
      const QRectF b =
          painter_.boundingRect(QRectF(0, 0, width_ - label_w, 1e6), flags, q(v.empty() ? "-" : v));
      ensure(b.height());
      painter_.setPen(Qt::black);
      painter_.setFont(label);
      painter_.drawText(QRectF(0, y_, label_w, b.height()), flags, q(k));
      painter_.setFont(value);
      painter_.drawText(QRectF(label_w, y_, width_ - label_w, b.height()), flags,
                        q(v.empty() ? "-" : v));
      y_ += b.height() + mm(0.6);
    }
  }
  /// A table with a header line; the header repeats on a new page.
  void table(const std::vector<Column>& columns,
             const std::vector<std::vector<std::string>>& rows) {
    const QFont head = font(8.0, true), body = font(8.0);
    const double pad = mm(1.0);
    auto row_height = [&](const std::vector<std::string>& cells, const QFont& f) {
      painter_.setFont(f);
      double h = 0.0;
      for (std::size_t i = 0; i < columns.size() && i < cells.size(); ++i) {
        const QRectF b = painter_.boundingRect(QRectF(0, 0, mm(columns[i].width_mm) - 2 * pad, 1e6),
                                               Qt::AlignLeft | Qt::TextWordWrap, q(cells[i]));
        h = std::max(h, b.height());
      }
      return h + 2 * pad;
    };
    auto draw_row = [&](const std::vector<std::string>& cells, const QFont& f, bool shaded) {
      const double h = row_height(cells, f);
      painter_.setFont(f);
      if (shaded)
        painter_.fillRect(QRectF(0, y_, total_width(columns), h), QColor(232, 236, 242));
      double x = 0.0;
      painter_.setPen(Qt::black);
      for (std::size_t i = 0; i < columns.size() && i < cells.size(); ++i) {
        const double w = mm(columns[i].width_mm);
        const int align =
            (columns[i].right ? Qt::AlignRight : Qt::AlignLeft) | Qt::AlignTop | Qt::TextWordWrap;
        painter_.drawText(QRectF(x + pad, y_ + pad, w - 2 * pad, h - 2 * pad), align, q(cells[i]));
        x += w;
      }
      y_ += h;
      painter_.setPen(QPen(QColor(190, 190, 190), mm(0.15)));
      painter_.drawLine(QPointF(0, y_), QPointF(total_width(columns), y_));
    };
    std::vector<std::string> titles;
    for (const auto& c : columns)
      titles.push_back(c.title);
    ensure(row_height(titles, head) + (rows.empty() ? 0.0 : row_height(rows.front(), body)));
    draw_row(titles, head, true);
    for (const auto& r : rows) {
      if (y_ + row_height(r, body) > bottom_) {
        new_page();
        draw_row(titles, head, true);
      }
      draw_row(r, body, false);
    }
    space(1.0);
  }
  /// Reserves `height_mm` for a drawing and returns its rectangle.
  QRectF block(double height_mm) {
    ensure(mm(height_mm));
    QRectF r(0, y_, width_, mm(height_mm));
    y_ += mm(height_mm);
    return r;
  }

 private:
  double total_width(const std::vector<Column>& columns) const {
    double w = 0.0;
    for (const auto& c : columns)
      w += mm(c.width_mm);
    return std::min(w, width_);
  }
  void draw_footer() {
    painter_.setFont(font(7.0));
    painter_.setPen(QColor(90, 90, 90));
    painter_.drawText(QRectF(0, writer_.height() - mm(5.0), width_, mm(5.0)),
                      Qt::AlignLeft | Qt::AlignBottom, q(footer_));
    painter_.drawText(QRectF(0, writer_.height() - mm(5.0), width_, mm(5.0)),
                      Qt::AlignRight | Qt::AlignBottom, q("page " + std::to_string(page_)));
  }

  QPdfWriter& writer_;
  QPainter painter_;
  std::string footer_;
  double dots_per_mm_ = 1.0;
  double width_ = 0.0;
  double bottom_ = 0.0;
  double y_ = 0.0;
  int page_ = 1;
};

struct Range {
  double lo = 0.0, hi = 1.0;
};

Range range_of(const std::vector<double>& v) {
  Range r{INFINITY, -INFINITY};
  for (double x : v) {
    if (std::isfinite(x)) {
      r.lo = std::min(r.lo, x);
      r.hi = std::max(r.hi, x);
    }
  }
  if (!(r.lo <= r.hi))
    return {0.0, 1.0};
  if (r.hi - r.lo < 1e-12) {
    r.lo -= 0.5;
    r.hi += 0.5;
  }
  return r;
}

/// One chart panel: frame, ticks with labels, axis titles with units, the
/// line, and dashed vertical endpoint markers.
void draw_panel(Pages& pages, QRectF area, const ChartLine& line, Range x, QColor color, bool dots,
                const std::vector<std::pair<double, std::string>>& markers, bool label_markers) {
  QPainter& p = pages.painter();
  const QRectF plot(area.left() + pages.mm(18.0), area.top() + pages.mm(2.0),
                    area.width() - pages.mm(22.0), area.height() - pages.mm(12.0));
  Range y = range_of(line.y);
  const double pad = 0.06 * (y.hi - y.lo);
  y.lo -= pad;
  y.hi += pad;
  auto px = [&](double v) { return plot.left() + (v - x.lo) / (x.hi - x.lo) * plot.width(); };
  auto py = [&](double v) { return plot.bottom() - (v - y.lo) / (y.hi - y.lo) * plot.height(); };

  const QFont tick_font = pages.font(7.0);
  p.setFont(tick_font);
  // Ticks and grid.
  const double xs = tick_step(x.hi - x.lo, 8), ys = tick_step(y.hi - y.lo, 5);
  for (double t = std::ceil(x.lo / xs) * xs; t <= x.hi + 1e-9 * xs; t += xs) {
    p.setPen(QPen(QColor(225, 225, 225), pages.mm(0.15)));
    p.drawLine(QPointF(px(t), plot.top()), QPointF(px(t), plot.bottom()));
    p.setPen(QPen(Qt::black, pages.mm(0.2)));
    p.drawLine(QPointF(px(t), plot.bottom()), QPointF(px(t), plot.bottom() + pages.mm(1.0)));
    p.drawText(
        QRectF(px(t) - pages.mm(8), plot.bottom() + pages.mm(1.2), pages.mm(16), pages.mm(4)),
        Qt::AlignHCenter | Qt::AlignTop, q(fixed(t, tick_decimals(xs))));
  }
  for (double t = std::ceil(y.lo / ys) * ys; t <= y.hi + 1e-9 * ys; t += ys) {
    p.setPen(QPen(QColor(225, 225, 225), pages.mm(0.15)));
    p.drawLine(QPointF(plot.left(), py(t)), QPointF(plot.right(), py(t)));
    p.setPen(QPen(Qt::black, pages.mm(0.2)));
    p.drawLine(QPointF(plot.left() - pages.mm(1.0), py(t)), QPointF(plot.left(), py(t)));
    p.drawText(QRectF(plot.left() - pages.mm(13.5), py(t) - pages.mm(2), pages.mm(12), pages.mm(4)),
               Qt::AlignRight | Qt::AlignVCenter, q(fixed(t, tick_decimals(ys))));
  }
  p.setPen(QPen(Qt::black, pages.mm(0.25)));
  p.drawRect(plot);
  // Axis titles.
  p.setFont(pages.font(8.0));
  p.drawText(QRectF(plot.left(), plot.bottom() + pages.mm(5.0), plot.width(), pages.mm(4.5)),
             Qt::AlignHCenter | Qt::AlignTop, q(line.x_title));
  p.save();
  p.translate(area.left() + pages.mm(1.0), plot.center().y());
  p.rotate(-90.0);
  p.drawText(QRectF(-plot.height() / 2, 0, plot.height(), pages.mm(4.5)),
             Qt::AlignHCenter | Qt::AlignTop, q(line.y_title));
  p.restore();
  // The data, clipped to the frame.
  p.save();
  p.setClipRect(plot);
  QPainterPath path;
  bool started = false;
  for (std::size_t i = 0; i < line.x.size() && i < line.y.size(); ++i) {
    if (!std::isfinite(line.x[i]) || !std::isfinite(line.y[i]))
      continue;
    const QPointF point(px(line.x[i]), py(line.y[i]));
    if (!started)
      path.moveTo(point);
    else
      path.lineTo(point);
    started = true;
  }
  p.setPen(QPen(color, pages.mm(0.35)));
  p.setBrush(Qt::NoBrush);
  p.drawPath(path);
  if (dots) {
    p.setBrush(color);
    p.setPen(Qt::NoPen);
    for (std::size_t i = 0; i < line.x.size() && i < line.y.size(); ++i)
      p.drawEllipse(QPointF(px(line.x[i]), py(line.y[i])), pages.mm(0.45), pages.mm(0.45));
  }
  QPen marker_pen(QColor(200, 30, 30), pages.mm(0.3), Qt::DashLine);
  p.setFont(pages.font(7.0));
  for (const auto& [volume_ml, label] : markers) {
    if (volume_ml < x.lo || volume_ml > x.hi)
      continue;
    p.setPen(marker_pen);
    p.drawLine(QPointF(px(volume_ml), plot.top()), QPointF(px(volume_ml), plot.bottom()));
    if (label_markers) {
      // Right of the line, or left of it when the line is near the right edge.
      p.setPen(QColor(200, 30, 30));
      const double w = pages.mm(40);
      const bool left = px(volume_ml) + pages.mm(1.0) + w > plot.right();
      p.drawText(QRectF(left ? px(volume_ml) - pages.mm(1.0) - w : px(volume_ml) + pages.mm(1.0),
                        plot.top() + pages.mm(1.0), w, pages.mm(4)),
                 (left ? Qt::AlignRight : Qt::AlignLeft) | Qt::AlignTop, q(label));
    }
  }
  p.restore();
}

void draw_run(Pages& pages, const RunReportData& d) {
  pages.title("Titration report: run " + std::to_string(d.run_id) + ", sample " + d.sample_id);
  pages.key_values({
      {"Sample", d.sample_id + (d.series.empty() ? "" : "   (series " + d.series + ")")},
      {"Status", d.status + (d.end_reason.empty() ? "" : ": " + d.end_reason)},
      {"Started / finished",
       d.started_utc + "  /  " + (d.finished_utc.empty() ? "-" : d.finished_utc) + "  (UTC)"},
      {"Method", d.method_name + ", version " + d.method_version},
      {"Titrant", d.titrant_name + ", " + significant(d.titrant_conc_mol_per_l) + " mol/L"},
      {"Titer used", d.titer},
      {"Calibration used", d.calibration},
      {"Sample volume", fixed(d.sample_volume_ml, 3) + " mL"},
      {"Burette / sensor", d.burette + "  /  " + d.sensor},
      {"Software", "measured with veq " + d.software_version + ", report by veq " +
                       d.report_software + " at " + d.generated_utc},
  });

  pages.heading("Titration curve and first derivative");
  std::vector<std::pair<double, std::string>> markers;
  bool any_used = false;
  for (const auto& e : d.endpoints)
    any_used = any_used || e.used_for_results;
  for (const auto& e : d.endpoints) {
    if (e.used_for_results || !any_used)
      markers.push_back({e.volume_ml, "endpoint " + fixed(e.volume_ml, 3) + " mL"});
  }
  if (d.curve.x.empty()) {
    pages.paragraph("No points were measured.");
  } else {
    Range x = range_of(d.curve.x);
    x.lo = std::min(0.0, x.lo);
    const bool with_derivative = !d.derivative.x.empty();
    const QRectF top = pages.block(with_derivative ? 62.0 : 80.0);
    draw_panel(pages, top, d.curve, x, QColor(20, 70, 160), true, markers, true);
    if (with_derivative) {
      const QRectF bottom = pages.block(45.0);
      draw_panel(pages, bottom, d.derivative, x, QColor(20, 130, 60), false, markers, false);
    }
    pages.paragraph(std::to_string(d.curve.x.size()) +
                        " points; blue: measured signal; green: first derivative; red dashed: "
                        "endpoints the results use.",
                    7.5);
  }

  pages.heading("Endpoints");
  if (d.endpoints.empty()) {
    pages.paragraph("No endpoint stored.");
  } else {
    std::vector<std::vector<std::string>> rows;
    for (const auto& e : d.endpoints) {
      rows.push_back({std::to_string(e.evaluation_id), e.method, fixed(e.volume_ml, 4),
                      fixed(e.uncertainty_ml, 4), significant(e.signal, 5),
                      e.flags.empty() ? "-" : e.flags, e.used_for_results ? "yes" : ""});
    }
    pages.table({{"evaluation", 20},
                 {"method", 24},
                 {"volume (mL)", 22, true},
                 {"u (mL)", 18, true},
                 {"signal", 26, true},
                 {"flags", 50},
                 {"used", 12}},
                rows);
    std::int64_t last = -1;
    for (const auto& e : d.endpoints) {
      if (e.evaluation_id == last)
        continue;
      last = e.evaluation_id;
      pages.paragraph("evaluation " + std::to_string(e.evaluation_id) + " (" + e.method +
                          ") options: " + e.options,
                      6.5, false, true);
    }
  }

  pages.heading("Results");
  if (d.results.empty()) {
    pages.paragraph("No result: " + (d.end_reason.empty() ? d.status : d.end_reason) + ".");
  } else {
    std::vector<std::vector<std::string>> rows;
    for (const auto& r : d.results)
      rows.push_back({r.name, significant(r.value), r.unit, r.flags.empty() ? "-" : r.flags});
    pages.table({{"result", 55}, {"value", 30, true}, {"unit", 22}, {"flags", 65}}, rows);
  }

  pages.heading("Uncertainty budget");
  if (!d.uncertainty) {
    pages.paragraph("No budget (see the notes).");
  } else {
    const auto& u = *d.uncertainty;
    std::vector<std::vector<std::string>> rows;
    for (const auto& r : u.rows) {
      rows.push_back({r.name, significant(r.value), r.unit, significant(r.standard_uncertainty, 3),
                      fixed(r.relative_percent, 3), fixed(r.share_percent, 1), r.basis});
    }
    pages.table({{"input", 30},
                 {"value", 18, true},
                 {"unit", 12},
                 {"u", 15, true},
                 {"u rel. (%)", 16, true},
                 {"share (%)", 15, true},
                 {"how u was evaluated", 66}},
                rows);
    pages.paragraph(u.result_name + " = " + significant(u.value) + " " + u.unit +
                        "; combined standard uncertainty " + significant(u.combined_standard, 3) +
                        " " + u.unit + "; expanded uncertainty U = " + significant(u.expanded, 3) +
                        " " + u.unit + " (k = " + fixed(u.coverage_factor, 0) + ")",
                    9.0, true);
    pages.paragraph(u.note, 7.5);
  }

  pages.heading("Run history");
  if (d.history.empty())
    pages.paragraph("No state transitions recorded.");
  for (const auto& h : d.history)
    pages.paragraph(h, 7.5);

  pages.heading("Audit summary");
  for (const auto& a : d.audit)
    pages.paragraph(a, 8.0);
  if (!d.notes.empty()) {
    pages.heading("Notes");
    for (const auto& n : d.notes)
      pages.paragraph(n, 8.0);
  }
}

void draw_signature(Pages& pages, const Signature& s) {
  pages.space(6.0);
  pages.ensure(pages.mm(16.0));
  if (s.signed_off) {
    pages.paragraph(
        "Reviewed and signed: " + s.reviewer + " (" + s.meaning + "), " + s.signed_utc + " UTC",
        10.0, true);
  } else {
    pages.paragraph("Reviewed and signed: ______________________________   date ______________",
                    10.0, true);
  }
}

veq::Result<void> save(const std::string& path, const QByteArray& bytes) {
  QSaveFile file(q(path));
  if (!file.open(QIODevice::WriteOnly)) {
    return make_error(ErrorKind::io, "cannot write " + path + ": " +
                                         file.errorString().toStdString() +
                                         " (check that the folder exists and is writable)");
  }
  if (file.write(bytes) != bytes.size() || !file.commit()) {
    return make_error(ErrorKind::io,
                      "cannot write " + path + ": " + file.errorString().toStdString());
  }
  return {};
}

template <typename Draw>
veq::Result<void> render(const std::string& path, const std::string& title,
                         const std::string& footer, Draw draw) {
  ensure_gui_application();
  QByteArray bytes;
  {
    QBuffer buffer(&bytes);
    buffer.open(QIODevice::WriteOnly);
    QPdfWriter writer(&buffer);
    writer.setResolution(300);
    writer.setPageLayout(QPageLayout(QPageSize(QPageSize::A4), QPageLayout::Portrait,
                                     QMarginsF(15, 15, 15, 12), QPageLayout::Millimeter));
    writer.setTitle(q(title));
    writer.setCreator(q("veq"));
    Pages pages(writer, footer);
    if (!pages.ok())
      return make_error(ErrorKind::io, "cannot draw the report for " + path);
    draw(pages);
    pages.finish();
  }
  return save(path, bytes);
}

}  // namespace

void ensure_gui_application() {
  if (QCoreApplication::instance())
    return;
  if (qEnvironmentVariableIsEmpty("QT_QPA_PLATFORM") && qEnvironmentVariableIsEmpty("DISPLAY") &&
      qEnvironmentVariableIsEmpty("WAYLAND_DISPLAY")) {
    qputenv("QT_QPA_PLATFORM", "offscreen");
  }
  // Qt warns when XDG_RUNTIME_DIR is unset and then uses /tmp/runtime-<user>;
  // a private folder of our own keeps the command line quiet.
  if (qEnvironmentVariableIsEmpty("XDG_RUNTIME_DIR")) {
    const std::string dir = "/tmp/veq-runtime-" + std::to_string(::getuid());
    struct stat info {};
    if ((::mkdir(dir.c_str(), 0700) == 0 || errno == EEXIST) && ::lstat(dir.c_str(), &info) == 0 &&
        S_ISDIR(info.st_mode) && info.st_uid == ::getuid() && (info.st_mode & 0077) == 0) {
      qputenv("XDG_RUNTIME_DIR", QByteArray::fromStdString(dir));
    }
  }
  static int argc = 1;
  static char name[] = "veq";
  static char* argv[] = {name, nullptr};
  // Lives until the program ends: Qt wants one application for the process.
  static QGuiApplication* application = new QGuiApplication(argc, argv);
  (void)application;
}

veq::Result<void> write_run_report(const RunReportData& data, const std::string& path) {
  const std::string footer = "veq " + data.report_software + "   run " +
                             std::to_string(data.run_id) + "   report made " + data.generated_utc;
  return render(path, "veq run " + std::to_string(data.run_id), footer, [&](Pages& pages) {
    draw_run(pages, data);
    draw_signature(pages, data.signature);
  });
}

veq::Result<void> write_series_report(const SeriesReportData& data, const std::string& path) {
  const std::string footer = "veq " + data.report_software + "   series " + data.series_name +
                             "   report made " + data.generated_utc;
  return render(path, "veq series " + data.series_name, footer, [&](Pages& pages) {
    pages.title("Series report: " + data.series_name);
    pages.key_values({
        {"Method", data.method_name + ", version " + data.method_version},
        {"Titrant", data.titrant_name + ", " + significant(data.titrant_conc_mol_per_l) + " mol/L"},
        {"Titer used", data.titer},
        {"Blank used", data.blank},
        {"Runs", std::to_string(data.runs.size()) + ", " + data.started_utc + " to " +
                     (data.finished_utc.empty() ? "-" : data.finished_utc) + " (UTC)"},
        {"Software", "report by veq " + data.report_software + " at " + data.generated_utc},
    });
    pages.heading("Results by sample");
    std::vector<std::vector<std::string>> rows;
    for (const auto& s : data.samples) {
      std::string runs;
      for (std::size_t i = 0; i < s.run_ids.size(); ++i)
        runs += (i ? ", " : "") + std::to_string(s.run_ids[i]);
      const bool several = s.values.size() > 1;
      rows.push_back({s.sample_id, s.kind, runs, std::to_string(s.values.size()),
                      significant(s.mean), several ? significant(s.sd, 3) : "-",
                      several ? fixed(s.rsd_percent, 2) : "-", s.unit,
                      s.outlier.empty() ? "-" : s.outlier, s.flags.empty() ? "-" : s.flags});
    }
    if (rows.empty())
      pages.paragraph("No result in this series.");
    else
      pages.table({{"sample", 28},
                   {"kind", 16},
                   {"runs", 18},
                   {"n", 8, true},
                   {"mean", 18, true},
                   {"sd", 18, true},
                   {"RSD (%)", 14, true},
                   {"unit", 14},
                   {"Grubbs", 16},
                   {"flags", 30}},
                  rows);
    pages.heading("Check standards");
    if (data.check_standards.empty()) {
      pages.paragraph("None in this series.");
    } else {
      std::vector<std::vector<std::string>> checks;
      for (const auto& c : data.check_standards) {
        checks.push_back({c.sample_id, std::to_string(c.run_id), significant(c.expected),
                          significant(c.found), c.unit, fixed(c.recovery_percent, 2),
                          "±" + fixed(c.tolerance_percent, 1), c.within ? "within" : "OUTSIDE"});
      }
      pages.table({{"standard", 30},
                   {"run", 12, true},
                   {"expected", 22, true},
                   {"found", 22, true},
                   {"unit", 16},
                   {"recovery (%)", 22, true},
                   {"limit (%)", 18, true},
                   {"verdict", 20}},
                  checks);
    }
    pages.heading("Flagged results");
    if (data.flagged.empty())
      pages.paragraph("None.");
    for (const auto& f : data.flagged)
      pages.paragraph(f, 8.5);
    if (!data.notes.empty()) {
      pages.heading("Notes");
      for (const auto& n : data.notes)
        pages.paragraph(n, 8.0);
    }
    draw_signature(pages, data.signature);
    for (const auto& run : data.runs) {
      pages.new_page();
      draw_run(pages, run);
      draw_signature(pages, run.signature);
    }
  });
}

}  // namespace veq::report
