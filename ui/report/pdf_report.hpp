// PDF reports drawn with QPdfWriter and QPainter (QtGui only, no widgets),
// from the plain data of ui/report/report_data.hpp. Works without a display:
// when no QGuiApplication exists, one is made on the offscreen platform.
#pragma once

#include <string>

#include "common/result.hpp"
#include "ui/report/report_data.hpp"

namespace veq::report {

/// Makes sure a QGuiApplication exists (fonts and painting need one). When
/// none exists and QT_QPA_PLATFORM is unset, the offscreen platform is chosen
/// unless a display ($DISPLAY or $WAYLAND_DISPLAY) is present. Safe to call
/// again; the application lives until the program ends.
void ensure_gui_application();

/// Writes a one-run report (A4): title block, curve with first derivative
/// and endpoint markers, endpoints, results, uncertainty budget, titer and
/// calibration, run history, audit summary and the signature line. The
/// file is written only once the whole document is drawn; errors name the
/// path and the reason.
veq::Result<void> write_run_report(const RunReportData& data, const std::string& path);

/// Writes a series report: a summary page (replicate statistics, check
/// standards, titer and blank, flagged results, signature line), then each
/// run's pages.
veq::Result<void> write_series_report(const SeriesReportData& data, const std::string& path);

}  // namespace veq::report
