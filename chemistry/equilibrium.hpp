// A general solver for aqueous complexation equilibria: components (metal ions,
// ligands in their fully deprotonated form, H+), species formed from them with an
// overall formation constant, a total for each component, pH either fixed or found
// from the proton balance, and an optional Davies activity correction.
//
// Pure computation: no I/O, no clocks, no globals. Not thread-safe per solver
// object (it owns its work arrays); use one EquilibriumSolver per thread.
#pragma once

#include <memory>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "common/result.hpp"

namespace veq::chemistry {

/// ln 10: converts log10 constants and activities to natural logarithms.
inline constexpr double kLn10 = 2.302585092994045684;

/// Largest number of components one system may have (H+ included). Fixed so that
/// the solver's work matrices live in the object and the Newton loop never allocates.
inline constexpr int kMaxComponents = 12;
/// Largest number of complex species (the free components are not counted).
inline constexpr int kMaxSpecies = 116;

/// Debye-Hueckel constant A of the Davies equation in (kg/mol)^(1/2) for water at
/// 25 degC: 0.509 (the value used by Davies and by most textbooks). The library
/// holds constants at 25 degC and makes no temperature correction.
inline constexpr double kDaviesA = 0.509;

/// Dimensionless log10 of the activity coefficient of an ion of charge `charge`
/// at ionic strength `ionic_strength_mol_per_l` by the Davies equation:
/// log g = -A z^2 (sqrt(I)/(1+sqrt(I)) - 0.3 I) (C. W. Davies, Ion Association,
/// Butterworths, 1962). Meant for I up to about 0.5 mol/L.
double davies_log10_activity_coefficient(int charge, double ionic_strength_mol_per_l);

/// A basis species: a metal ion, a ligand in its fully deprotonated form, or H+.
struct Component {
  std::string name;  ///< e.g. "H+", "Ca2+", "EDTA" (as Y4-)
  int charge = 0;    ///< ionic charge of the free component
};

/// A complex (or protonated or hydroxo form) built from the components.
struct Species {
  std::string name;
  /// One coefficient per component. Only the proton may be negative: a hydroxo
  /// species M(OH)n is M + n H2O - n H+, with coefficient -n for H+.
  std::vector<int> stoichiometry;
  /// log10 of the overall formation constant from the free components, in the
  /// concentration scale at reference_ionic_strength_mol_per_l (mol/L units).
  double log10_beta = 0.0;
  /// Ionic strength in mol/L at which log10_beta holds; used only when the
  /// conditions ask for an activity correction.
  double reference_ionic_strength_mol_per_l = 0.0;
};

/// Components and species of one chemical system. The free components are
/// species too (formation constant 1); they are not listed in `species`.
struct ChemicalSystem {
  std::vector<Component> components;
  std::vector<Species> species;
  /// Index of H+ among the components, or -1 when the system has no acid-base
  /// chemistry. Water's autoprotolysis is an ordinary species (OH-, coefficient
  /// -1 for H+, log10_beta = -pKw) so that its constant is visible and sourced.
  int proton = -1;

  /// Index of the named component or species, or -1.
  int component_index(std::string_view name) const;
  int species_index(std::string_view name) const;
  /// Charge of a species: the sum of its components' charges times coefficients.
  int species_charge(int species) const;
  /// Checks sizes, finite constants, coefficient signs; the error names the
  /// offending species and what is wrong with it.
  Result<void> validate() const;
};

/// What is dissolved: the totals and how pH is set.
struct Conditions {
  /// Total (analytical) concentration of each component in mol/L, one per
  /// component. For the proton it is the proton excess T_H over the reference
  /// state (water and the fully deprotonated ligands): protons added with acids
  /// minus hydroxide added with bases; it may be negative. It is ignored when
  /// `ph` is set.
  std::vector<double> total_mol_per_l;
  /// Fixed pH (a buffered sample). When empty, pH follows from the proton balance.
  std::optional<double> ph;
  /// Ionic strength in mol/L for a Davies correction of every constant from its
  /// reference ionic strength; when set, pH means -log10 of the H+ activity.
  /// When empty, constants are used as listed and pH is -log10 [H+].
  std::optional<double> ionic_strength_mol_per_l;
};

/// Tuning of the Newton solver. The defaults solve every valid system tried in
/// the robustness test (pH 0-14, log K 0-30, totals 1e-9..1 mol/L).
struct SolverOptions {
  /// Newton iterations allowed. A cold start typically needs 8-25 and a warm
  /// start along a curve 2-5; 200 leaves room for the hard cases (free
  /// concentrations 30 decades below the totals) without hiding a real failure.
  int max_iterations = 200;
  /// Largest relative mass-balance error accepted: |sum - total| / (sum of the
  /// magnitudes of its terms). 1e-10 is five decades above rounding error, so it
  /// is reachable for every system and far below any analytical uncertainty.
  double relative_tolerance = 1e-10;
  /// Largest change of any log10 free concentration in one Newton step. Ten
  /// decades: large enough that the far-from-solution phase stays short, small
  /// enough that exp() never overflows from a trial step.
  double max_step_log10 = 10.0;
  /// Step halvings tried by the line search before it switches to a convex
  /// fallback step. 30 halvings reach a step of 1e-9 of the Newton step.
  int max_backtracks = 30;
  /// Armijo sufficient-decrease parameter of the line search; 1e-4 is the usual
  /// choice (Nocedal and Wright, Numerical Optimization, 2nd ed., section 3.1).
  double armijo = 1e-4;
};

/// The equilibrium state found by the solver.
struct Speciation {
  /// Free concentration of each component in mol/L (0 when its total is 0).
  std::vector<double> free_mol_per_l;
  /// log10 of the free concentrations (-infinity when the total is 0); the
  /// solver's own variables, kept so that a warm start loses no digits.
  std::vector<double> log10_free;
  /// Concentration of each species of ChemicalSystem::species in mol/L.
  std::vector<double> species_mol_per_l;
  double ph = 0.0;                        ///< pH (activity scale when corrected)
  double ionic_strength_mol_per_l = 0.0;  ///< ionic strength used (0: none)
  int iterations = 0;                     ///< Newton iterations used
  /// Largest relative mass-balance error at the solution, as defined for
  /// SolverOptions::relative_tolerance.
  double max_relative_residual = 0.0;
};

/// Sum over all species (free component included) of coefficient times
/// concentration, in mol/L: what the mass balance of `component` adds up to.
double component_sum_mol_per_l(const ChemicalSystem& system, const Speciation& s, int component);

/// Sum of charge times concentration over all species, in mol/L of charge.
double charge_sum_mol_per_l(const ChemicalSystem& system, const Speciation& s);

/// Newton's method on the logarithms of the free concentrations (see
/// docs/chemistry.md for the equations). Construct once per system, then solve
/// many times: the work arrays are sized once and the Newton loop does not
/// allocate.
class EquilibriumSolver {
 public:
  /// Validates the system; the error names the problem.
  static Result<EquilibriumSolver> create(ChemicalSystem system, SolverOptions options = {});

  EquilibriumSolver(EquilibriumSolver&&) noexcept;
  EquilibriumSolver& operator=(EquilibriumSolver&&) noexcept;
  ~EquilibriumSolver();

  const ChemicalSystem& system() const;
  const SolverOptions& options() const;

  /// Cold start from the totals. On success fills `out` (its vectors are resized
  /// once and reused), otherwise `out` is unspecified and the error describes the
  /// system and the largest remaining imbalance.
  Result<void> solve(const Conditions& conditions, Speciation& out);

  /// Warm start from an earlier solution of the same system (for example the
  /// previous point of a curve). Components whose total was 0 in `start` begin
  /// from their total.
  Result<void> solve_from(const Conditions& conditions, const Speciation& start, Speciation& out);

  /// Convenience form that returns a new Speciation.
  Result<Speciation> solve(const Conditions& conditions);

 private:
  struct Impl;
  explicit EquilibriumSolver(std::unique_ptr<Impl> impl);
  std::unique_ptr<Impl> impl_;
};

}  // namespace veq::chemistry
