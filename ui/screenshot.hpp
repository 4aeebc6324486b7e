// The run view rendered to a PNG file without any window on screen: for the
// README, for reports, and for the tests that check what the view draws.
#pragma once

#include <cstdint>
#include <string>

#include "common/result.hpp"

namespace veq::ui {

/// Size of a screenshot (px). 1280 x 860 shows both charts with readable
/// axis labels and fits a README column when scaled down.
struct ScreenshotSize {
  int width_px = 1280;
  int height_px = 860;
};

/// Opens a database, shows one run in the main window and saves the window as
/// a PNG. Needs a QApplication (use QT_QPA_PLATFORM=offscreen without a
/// display). Errors: not_found for a missing file or run, io if the PNG cannot
/// be written.
Result<void> save_run_screenshot(const std::string& database_path, std::int64_t run_id,
                                 const std::string& png_path, ScreenshotSize size = {});

}  // namespace veq::ui
