#include "ui/screenshot.hpp"

#include <QtGui/QPixmap>
#include <QtWidgets/QApplication>

#include "ui/main_window.hpp"
#include "ui/run_browser.hpp"

namespace veq::ui {

Result<void> save_run_screenshot(const std::string& database_path, std::int64_t run_id,
                                 const std::string& png_path, ScreenshotSize size) {
  MainWindow window;
  // Laid out and painted like a shown window, yet never put on a screen.
  window.setAttribute(Qt::WA_DontShowOnScreen);
  if (auto opened = window.open_database(database_path); !opened)
    return opened;
  if (auto shown = window.browser().show_run(run_id); !shown)
    return shown;
  window.show_view_of(&window.browser());
  window.resize(size.width_px, size.height_px);
  window.show();
  QApplication::processEvents();
  const QPixmap picture = window.grab();
  window.hide();
  if (!picture.save(QString::fromStdString(png_path), "PNG")) {
    return make_error(ErrorKind::io, "cannot write the screenshot to " + png_path +
                                         "; check that its folder exists and is writable");
  }
  return {};
}

}  // namespace veq::ui
