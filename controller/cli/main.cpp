// veq: controller and endpoint finder for complexometric titrations.
#include <exception>
#include <iostream>

#include "common/result.hpp"
#include "common/version.hpp"
#include "controller/cli/commands.hpp"
#if VEQ_WITH_REPORT
// The one place where the command line meets Qt: the executable wires the
// report library of ui/ in; the controller's libraries never see it.
#include "ui/report/report_command.hpp"
#endif

int main(int argc, char** argv) {
  CLI::App app{
      "veq: automatic complexometric titrations of metal ions.\n"
      "Drives a motor burette and an electrode, titrates, finds the endpoint, computes the\n"
      "result and keeps every raw point in an SQLite file (default ./veq.sqlite, or $VEQ_DB)."};
  app.set_version_flag("--version", std::string("veq ") + veq::kVersion);
  app.require_subcommand(1);
  veq::cli::add_demo_command(app);
  veq::cli::add_store_commands(app);
  veq::cli::add_chemistry_commands(app);
  veq::cli::add_evaluate_commands(app);
  veq::cli::add_run_command(app);
  veq::cli::add_trials_command(app);
  veq::cli::add_series_commands(app);
  veq::cli::add_method_commands(app);
  veq::cli::add_titrant_commands(app);
  veq::cli::add_audit_commands(app);
  veq::cli::add_export_command(app);
#if VEQ_WITH_REPORT
  veq::report::add_report_command(app);
#else
  veq::cli::add_report_unavailable_command(app);
#endif
  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    return app.exit(e);
  } catch (const veq::VeqException& e) {
    std::cerr << "veq: " << e.what() << "\n";
    return 1;
  } catch (const std::exception& e) {
    std::cerr << "veq: " << e.what() << "\n";
    return 1;
  }
  return 0;
}
