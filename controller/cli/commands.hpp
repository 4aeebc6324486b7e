// The `veq` command line: each command group registers itself on the app.
#pragma once

#include <CLI/CLI.hpp>

namespace veq::cli {

/// `veq demo`: an unattended series on simulated instruments in virtual time.
void add_demo_command(CLI::App& app);
/// `veq runs`: list stored runs; `veq show`: one run with its points.
void add_store_commands(CLI::App& app);
/// `veq speciate` and `veq predict`: the equilibrium engine.
void add_chemistry_commands(CLI::App& app);
/// `veq import` and `veq evaluate`: curves from files, endpoint methods.
void add_evaluate_commands(CLI::App& app);
/// `veq run`: one titration against instruments on ports.
void add_run_command(CLI::App& app);
/// `veq user add`, `veq sign-off`, `veq choose-evaluation`, `veq audit verify|list`.
void add_audit_commands(CLI::App& app);
/// `veq export`: runs, points, evaluations and results as CSV or JSON.
void add_export_command(CLI::App& app);
/// `veq report` in a build without Qt: it says so and exits with status 2.
/// With Qt, main() registers ui/report's command instead.
void add_report_unavailable_command(CLI::App& app);
/// `veq series run|check|list|show`: series on the simulator, and stored.
void add_series_commands(CLI::App& app);
/// `veq method import|export|list|check`: method files and their versions.
void add_method_commands(CLI::App& app);
/// `veq titrant add|list`: titrant solutions and their titers.
void add_titrant_commands(CLI::App& app);
/// `veq trials`: endpoint methods on seeded simulated curves (for developers).
void add_trials_command(CLI::App& app);

}  // namespace veq::cli
