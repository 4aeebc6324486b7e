// `veq report`: the PDF report as a command. The `veq` executable's main()
// registers it when veq is built with Qt; the controller's command-line code
// never includes this header (DEVELOPERS.md, "Reports and the command line").
#pragma once

#include <CLI/CLI.hpp>

namespace veq::report {

/// Adds `veq report --db FILE (--run ID | --series NAME) --out FILE.pdf`.
void add_report_command(CLI::App& app);

}  // namespace veq::report
