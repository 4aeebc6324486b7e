#include "chemistry/equilibrium.hpp"

#include <Eigen/Cholesky>
#include <Eigen/Dense>
#include <Eigen/LU>
#include <algorithm>
#include <array>
#include <cmath>
#include <cstdio>
#include <limits>
#include <set>
#include <string>
#include <utility>

namespace veq::chemistry {

namespace {

// Rows: every free component plus every complex.
constexpr int kMaxRows = kMaxSpecies + kMaxComponents;
// exp() overflows just above 709; a trial point beyond this is rejected.
constexpr double kMaxExponent = 700.0;
// Below this relative residual the Newton step is taken without a line search.
constexpr double kCloseResidual = 1e-6;
// A predicted change of G smaller than this fraction of its terms is rounding noise.
constexpr double kResolvableSlope = 1e-9;

using SmallMatrix = Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::ColMajor,
                                  kMaxComponents, kMaxComponents>;
using SmallVector = Eigen::Matrix<double, Eigen::Dynamic, 1, Eigen::ColMajor, kMaxComponents, 1>;

double davies_f(double ionic_strength) {
  const double r = std::sqrt(ionic_strength);
  return r / (1.0 + r) - 0.3 * ionic_strength;
}

std::string format_number(double v) {
  char buffer[32];
  std::snprintf(buffer, sizeof buffer, "%.3g", v);
  return buffer;
}

}  // namespace

double davies_log10_activity_coefficient(int charge, double ionic_strength_mol_per_l) {
  return -kDaviesA * static_cast<double>(charge * charge) * davies_f(ionic_strength_mol_per_l);
}

int ChemicalSystem::component_index(std::string_view name) const {
  for (std::size_t i = 0; i < components.size(); ++i) {
    if (components[i].name == name)
      return static_cast<int>(i);
  }
  return -1;
}

int ChemicalSystem::species_index(std::string_view name) const {
  for (std::size_t i = 0; i < species.size(); ++i) {
    if (species[i].name == name)
      return static_cast<int>(i);
  }
  return -1;
}

int ChemicalSystem::species_charge(int s) const {
  int z = 0;
  const auto& st = species.at(static_cast<std::size_t>(s)).stoichiometry;
  for (std::size_t j = 0; j < components.size() && j < st.size(); ++j) {
    z += st[j] * components[j].charge;
  }
  return z;
}

Result<void> ChemicalSystem::validate() const {
  const auto nc = components.size();
  if (nc == 0)
    return make_error(ErrorKind::invalid_input, "chemical system has no components");
  if (nc > static_cast<std::size_t>(kMaxComponents)) {
    return make_error(ErrorKind::invalid_input,
                      "chemical system has " + std::to_string(nc) + " components; at most " +
                          std::to_string(kMaxComponents) + " are supported");
  }
  if (species.size() > static_cast<std::size_t>(kMaxSpecies)) {
    return make_error(ErrorKind::invalid_input,
                      "chemical system has " + std::to_string(species.size()) +
                          " species; at most " + std::to_string(kMaxSpecies) +
                          " are supported (leave out species that cannot form)");
  }
  if (proton >= static_cast<int>(nc) || proton < -1) {
    return make_error(ErrorKind::invalid_input, "proton index is not a component index");
  }
  std::set<std::string> names;
  for (const auto& c : components) {
    if (c.name.empty())
      return make_error(ErrorKind::invalid_input, "a component has no name");
    if (!names.insert(c.name).second) {
      return make_error(ErrorKind::invalid_input, "component name '" + c.name + "' is repeated");
    }
  }
  for (const auto& s : species) {
    const std::string where = "species '" + s.name + "'";
    if (s.name.empty())
      return make_error(ErrorKind::invalid_input, "a species has no name");
    if (!names.insert(s.name).second) {
      return make_error(ErrorKind::invalid_input,
                        where + ": name repeats a component or another species");
    }
    if (s.stoichiometry.size() != nc) {
      return make_error(ErrorKind::invalid_input, where + " has " +
                                                      std::to_string(s.stoichiometry.size()) +
                                                      " stoichiometric coefficients for " +
                                                      std::to_string(nc) + " components");
    }
    if (!std::isfinite(s.log10_beta) || std::abs(s.log10_beta) > 250.0) {
      return make_error(ErrorKind::invalid_input,
                        where + ": log10 beta must be a finite number within +-250");
    }
    if (!(s.reference_ionic_strength_mol_per_l >= 0.0) ||
        !std::isfinite(s.reference_ionic_strength_mol_per_l)) {
      return make_error(ErrorKind::invalid_input,
                        where + ": reference ionic strength must be finite and >= 0");
    }
    bool any = false;
    for (std::size_t j = 0; j < nc; ++j) {
      const int a = s.stoichiometry[j];
      if (a != 0)
        any = true;
      if (a < 0 && static_cast<int>(j) != proton) {
        return make_error(ErrorKind::invalid_input,
                          where + ": coefficient of '" + components[j].name +
                              "' is negative; only H+ may be (hydroxo species)");
      }
      if (std::abs(a) > 24) {
        return make_error(ErrorKind::invalid_input,
                          where + ": coefficient of '" + components[j].name + "' exceeds 24");
      }
    }
    if (!any)
      return make_error(ErrorKind::invalid_input, where + " has no components");
  }
  return {};
}

namespace {

double sum_over_species(const ChemicalSystem& system, const Speciation& s, int component,
                        bool charge) {
  const auto nc = system.components.size();
  double sum = 0.0;
  for (std::size_t j = 0; j < nc; ++j) {
    const double w =
        charge ? system.components[j].charge : (static_cast<int>(j) == component ? 1.0 : 0.0);
    sum += w * s.free_mol_per_l[j];
  }
  for (std::size_t i = 0; i < system.species.size(); ++i) {
    const double w = charge ? system.species_charge(static_cast<int>(i))
                            : system.species[i].stoichiometry[static_cast<std::size_t>(component)];
    sum += w * s.species_mol_per_l[i];
  }
  return sum;
}

}  // namespace

double component_sum_mol_per_l(const ChemicalSystem& system, const Speciation& s, int component) {
  return sum_over_species(system, s, component, false);
}

double charge_sum_mol_per_l(const ChemicalSystem& system, const Speciation& s) {
  return sum_over_species(system, s, -1, true);
}

// ---------------------------------------------------------------------------
// The solver.
//
// Unknowns: x_j = ln of the free concentration of each component with a positive
// total (and of H+ when pH is not fixed). Each active species i has
//   c_i = exp(lnk_i + sum_j a_ij x_j),
// where lnk_i holds its constant (activity-corrected) and the fixed-pH factor.
// For every unknown j the balance is split into its positive and negative sides,
//   P_j = sum_{a_ij>0} a_ij c_i + max(-T_j, 0),  N_j = sum_{a_ij<0} |a_ij| c_i + max(T_j, 0),
// so that it reads P_j = N_j whatever the sign of the total (the proton excess may
// be negative). Newton's method is applied to F_j = ln P_j - ln N_j: for a metal
// or ligand this is ln(sum/total), whose Newton step is exact when one species
// dominates, so a free concentration 30 decades off is corrected in one step
// rather than 70 (as with the plain residual). The line search minimises |F|^2.
//
// If the line search fails, one step is taken on the convex function
//   G(x) = sum_i c_i - sum_j T_j x_j,
// whose gradient is the plain mass-balance residual and whose Hessian
// A^T diag(c) A is positive definite; a Newton step with backtracking on G always
// makes progress (this is the dual of the Gibbs energy minimisation, see e.g.
// W. R. Smith and R. W. Missen, Chemical Reaction Equilibrium Analysis, Wiley
// 1982, chapter 6), so the iteration cannot stall.
// ---------------------------------------------------------------------------

struct EquilibriumSolver::Impl {
  ChemicalSystem system;
  SolverOptions options;
  int nc = 0;
  int nrows = 0;  // nc + number of complexes

  // Per row (free components first): stoichiometry, ln beta at the reference
  // ionic strength, Davies bookkeeping.
  std::array<std::array<int, kMaxComponents>, kMaxRows> full_a{};
  std::array<double, kMaxRows> ln_beta_ref{};
  std::array<double, kMaxRows> delta_z2{};
  std::array<double, kMaxRows> f_ref{};

  // Per solve: the reduced problem.
  int n = 0;  // unknowns
  int m = 0;  // active species
  std::array<int, kMaxComponents> unknown_component{};
  std::array<int, kMaxComponents> unknown_of_component{};  // -1 when not an unknown
  std::array<int, kMaxRows> active_row{};
  std::array<int, kMaxRows> nnz{};
  std::array<std::array<int, kMaxComponents>, kMaxRows> idx{};
  std::array<std::array<double, kMaxComponents>, kMaxRows> coef{};
  std::array<double, kMaxRows> lnk{};
  int n_fixed = 0;  // species made of fixed H+ only
  std::array<int, kMaxRows> fixed_row{};
  std::array<double, kMaxRows> fixed_lnk{};
  std::array<double, kMaxRows> c{};
  std::array<double, kMaxComponents> t_pos{}, t_neg{}, p{}, q{};
  SmallVector x, f, d, x_trial, grad, scale, x_start, x_best;
  double last_step = 1.0;
  SmallMatrix jac;
  Eigen::PartialPivLU<SmallMatrix> lu;
  Eigen::LDLT<SmallMatrix> ldlt;
  double ln_h_fixed = 0.0;
  double ionic_strength = 0.0;
  bool corrected = false;

  Impl(ChemicalSystem s, SolverOptions o) : system(std::move(s)), options(o) {
    nc = static_cast<int>(system.components.size());
    nrows = nc + static_cast<int>(system.species.size());
    for (int j = 0; j < nc; ++j) {
      full_a[j].fill(0);
      full_a[j][j] = 1;
      ln_beta_ref[j] = 0.0;
      delta_z2[j] = 0.0;
      f_ref[j] = 0.0;
    }
    for (int i = 0; i < static_cast<int>(system.species.size()); ++i) {
      const auto& sp = system.species[static_cast<std::size_t>(i)];
      const int row = nc + i;
      full_a[row].fill(0);
      int z = 0;
      int sum_z2 = 0;
      for (int j = 0; j < nc; ++j) {
        const int a = sp.stoichiometry[static_cast<std::size_t>(j)];
        full_a[row][j] = a;
        const int zj = system.components[static_cast<std::size_t>(j)].charge;
        z += a * zj;
        sum_z2 += a * zj * zj;
      }
      ln_beta_ref[row] = sp.log10_beta * kLn10;
      delta_z2[row] = static_cast<double>(sum_z2 - z * z);
      f_ref[row] = davies_f(sp.reference_ionic_strength_mol_per_l);
    }
    x.resize(0);
    jac.resize(0, 0);
  }

  std::string describe(const Conditions& cond) const {
    std::string text = "system of";
    for (int j = 0; j < nc; ++j) {
      text += (j == 0 ? " " : ", ");
      text += system.components[static_cast<std::size_t>(j)].name;
      if (j == system.proton) {
        // Appended piecewise: g++ 12 warns falsely (-Wrestrict) on "literal" + string&&.
        if (cond.ph) {
          text += " (pH fixed at ";
          text += format_number(*cond.ph);
        } else {
          text += " (proton excess ";
          text += format_number(cond.total_mol_per_l[static_cast<std::size_t>(j)]);
          text += " mol/L";
        }
        text += ")";
      } else {
        text += " ";
        text += format_number(cond.total_mol_per_l[static_cast<std::size_t>(j)]);
        text += " mol/L";
      }
    }
    text += " with " + std::to_string(system.species.size()) + " species";
    if (cond.ionic_strength_mol_per_l) {
      text += " at ionic strength " + format_number(*cond.ionic_strength_mol_per_l) + " mol/L";
    }
    return text;
  }

  Result<void> check_conditions(const Conditions& cond) const {
    if (cond.total_mol_per_l.size() != static_cast<std::size_t>(nc)) {
      return make_error(ErrorKind::invalid_input,
                        "conditions give " + std::to_string(cond.total_mol_per_l.size()) +
                            " totals for " + std::to_string(nc) + " components");
    }
    for (int j = 0; j < nc; ++j) {
      const double t = cond.total_mol_per_l[static_cast<std::size_t>(j)];
      const auto& name = system.components[static_cast<std::size_t>(j)].name;
      if (j == system.proton && cond.ph)
        continue;
      if (!std::isfinite(t)) {
        return make_error(ErrorKind::invalid_input, "total of '" + name + "' is not a number");
      }
      if (j != system.proton && t < 0.0) {
        return make_error(ErrorKind::invalid_input,
                          "total of '" + name + "' is negative (" + format_number(t) + " mol/L)");
      }
      if (std::abs(t) > 100.0) {
        return make_error(ErrorKind::invalid_input,
                          "total of '" + name + "' is " + format_number(t) +
                              " mol/L, beyond any aqueous solution (at most 100)");
      }
    }
    if (cond.ph) {
      if (system.proton < 0) {
        return make_error(ErrorKind::invalid_input, "a fixed pH is given but the system has no H+");
      }
      if (!std::isfinite(*cond.ph) || *cond.ph < -2.0 || *cond.ph > 16.0) {
        return make_error(ErrorKind::invalid_input,
                          "pH " + format_number(*cond.ph) + " is outside -2..16");
      }
    }
    if (cond.ionic_strength_mol_per_l) {
      const double i = *cond.ionic_strength_mol_per_l;
      if (!std::isfinite(i) || i < 0.0 || i > 1.0) {
        return make_error(ErrorKind::invalid_input,
                          "ionic strength " + format_number(i) +
                              " mol/L is outside 0..1, where the Davies equation is not meant "
                              "to be used");
      }
    }
    return {};
  }

  // Builds the reduced problem; returns an error when the system is infeasible.
  Result<void> setup(const Conditions& cond) {
    corrected = cond.ionic_strength_mol_per_l.has_value();
    ionic_strength = corrected ? *cond.ionic_strength_mol_per_l : 0.0;
    const double f_now = davies_f(ionic_strength);
    const bool fixed_ph = cond.ph.has_value();
    ln_h_fixed = 0.0;
    if (fixed_ph) {
      double log10_h = -*cond.ph;
      if (corrected)
        log10_h -= davies_log10_activity_coefficient(1, ionic_strength);
      ln_h_fixed = log10_h * kLn10;
    }
    n = 0;
    for (int j = 0; j < nc; ++j) {
      unknown_of_component[j] = -1;
      const double t = cond.total_mol_per_l[static_cast<std::size_t>(j)];
      const bool is_proton = j == system.proton;
      if (is_proton ? !fixed_ph : t > 0.0) {
        unknown_of_component[j] = n;
        unknown_component[n] = j;
        t_pos[n] = std::max(t, 0.0);
        t_neg[n] = std::max(-t, 0.0);
        ++n;
      }
    }
    m = 0;
    n_fixed = 0;
    bool proton_taker = false;
    for (int row = 0; row < nrows; ++row) {
      bool active = true;
      double k = ln_beta_ref[row];
      if (corrected)
        k += kLn10 * kDaviesA * delta_z2[row] * (f_ref[row] - f_now);
      int count = 0;
      for (int j = 0; j < nc; ++j) {
        const int a = full_a[row][j];
        if (a == 0)
          continue;
        const int u = unknown_of_component[j];
        if (u >= 0) {
          idx[m][count] = u;
          coef[m][count] = a;
          ++count;
        } else if (j == system.proton && fixed_ph) {
          k += a * ln_h_fixed;
        } else {
          active = false;  // contains a component that is absent
          break;
        }
      }
      if (!active)
        continue;
      if (count == 0) {
        // Only fixed H+ (OH- at a fixed pH): enters no balance, reported as is.
        fixed_row[n_fixed] = row;
        fixed_lnk[n_fixed] = k;
        ++n_fixed;
        continue;
      }
      for (int t = 0; t < count; ++t) {
        if (coef[m][t] < 0)
          proton_taker = true;
      }
      active_row[m] = row;
      nnz[m] = count;
      lnk[m] = k;
      ++m;
    }
    if (system.proton >= 0 && !fixed_ph) {
      const double th = cond.total_mol_per_l[static_cast<std::size_t>(system.proton)];
      if (th <= 0.0 && !proton_taker) {
        return make_error(ErrorKind::invalid_input,
                          describe(cond) +
                              ": the proton excess is not positive but no species releases "
                              "H+ (add the OH- species of water)");
      }
    }
    x.resize(n);
    f.resize(n);
    d.resize(n);
    x_trial.resize(n);
    grad.resize(n);
    x_start.resize(n);
    x_best.resize(n);
    scale.resize(n);
    jac.resize(n, n);
    return {};
  }

  // c_i at point xv; returns false on overflow.
  bool evaluate_species(const SmallVector& xv) {
    for (int i = 0; i < m; ++i) {
      double e = lnk[i];
      for (int t = 0; t < nnz[i]; ++t)
        e += coef[i][t] * xv[idx[i][t]];
      if (e > kMaxExponent)
        return false;
      c[i] = std::exp(e);
    }
    return true;
  }

  // P_j and N_j (stored in p and q) from c.
  void balance_sides() {
    for (int j = 0; j < n; ++j) {
      p[j] = t_neg[j];
      q[j] = t_pos[j];
    }
    for (int i = 0; i < m; ++i) {
      for (int t = 0; t < nnz[i]; ++t) {
        const double v = coef[i][t] * c[i];
        if (v > 0.0) {
          p[idx[i][t]] += v;
        } else {
          q[idx[i][t]] -= v;
        }
      }
    }
  }

  double max_relative_residual() const {
    double worst = 0.0;
    for (int j = 0; j < n; ++j) {
      worst = std::max(worst, std::abs(p[j] - q[j]) / std::max(p[j], q[j]));
    }
    return worst;
  }

  int worst_unknown() const {
    int w = 0;
    double worst = -1.0;
    for (int j = 0; j < n; ++j) {
      const double r = std::abs(p[j] - q[j]) / std::max(p[j], q[j]);
      if (r > worst) {
        worst = r;
        w = j;
      }
    }
    return w;
  }

  // Jacobian of F at the current c, p, q.
  void build_log_jacobian() {
    jac.setZero();
    for (int i = 0; i < m; ++i) {
      for (int t = 0; t < nnz[i]; ++t) {
        const int j = idx[i][t];
        const double a = coef[i][t];
        const double w = a * c[i] / (a > 0.0 ? p[j] : q[j]);
        for (int u = 0; u < nnz[i]; ++u)
          jac(j, idx[i][u]) += w * coef[i][u];
      }
    }
  }

  // Convex function G at xv (+inf on overflow); leaves c at xv.
  double convex_objective(const SmallVector& xv) {
    if (!evaluate_species(xv))
      return std::numeric_limits<double>::infinity();
    double g = 0.0;
    for (int i = 0; i < m; ++i)
      g += c[i];
    for (int j = 0; j < n; ++j)
      g -= (t_pos[j] - t_neg[j]) * xv[j];
    return g;
  }

  void limit_step() {
    const double cap = options.max_step_log10 * kLn10;
    const double biggest = d.cwiseAbs().maxCoeff();
    if (biggest > cap)
      d *= cap / biggest;
  }

  // Backtracking along d from x on G (value g0, directional derivative slope < 0).
  // On success x and c are at the accepted point and g0 holds its G.
  bool line_search(double& g0, double slope) {
    double t = 1.0;
    for (int b = 0; b <= options.max_backtracks; ++b) {
      x_trial = x + t * d;
      const double g = convex_objective(x_trial);
      if (g <= g0 + options.armijo * t * slope) {
        x = x_trial;
        g0 = g;
        last_step = t;
        return true;
      }
      t *= 0.5;
    }
    return false;
  }

  // Size of the terms that make up G, for judging whether a change is resolvable.
  double g_scale() const {
    double sum = 0.0;
    for (int i = 0; i < m; ++i)
      sum += c[i];
    for (int j = 0; j < n; ++j)
      sum += std::abs((t_pos[j] - t_neg[j]) * x[j]);
    return sum;
  }

  // Half the squared log residual at the current c (after balance_sides()).
  double log_merit() const {
    double phi = 0.0;
    for (int j = 0; j < n; ++j) {
      const double fj = std::log(p[j] / q[j]);
      phi += fj * fj;
    }
    return 0.5 * phi;
  }

  // Backtracking along the Newton direction d of F = ln P - ln N on |F|^2/2,
  // whose directional derivative is -|F|^2. Expects f to hold F at x.
  bool residual_line_search(double& g0) {
    const double phi0 = 0.5 * f.squaredNorm();
    double t = 1.0;
    for (int b = 0; b <= options.max_backtracks; ++b) {
      x_trial = x + t * d;
      const double g = convex_objective(x_trial);
      if (std::isfinite(g)) {
        balance_sides();
        const double phi = log_merit();
        if (phi <= phi0 * (1.0 - 2.0 * options.armijo * t)) {
          x = x_trial;
          g0 = g;
          return true;
        }
      }
      t *= 0.5;
    }
    return false;
  }

  // Newton direction on G, Jacobi-scaled because the diagonal spans many decades.
  void convex_direction() {
    jac.setZero();
    for (int i = 0; i < m; ++i) {
      for (int t = 0; t < nnz[i]; ++t) {
        const double w = coef[i][t] * c[i];
        for (int u = 0; u < nnz[i]; ++u)
          jac(idx[i][t], idx[i][u]) += w * coef[i][u];
      }
    }
    for (int j = 0; j < n; ++j)
      scale[j] = 1.0 / std::sqrt(std::max(jac(j, j), 1e-300));
    for (int j = 0; j < n; ++j) {
      for (int k = 0; k < n; ++k)
        jac(j, k) *= scale[j] * scale[k];
    }
    ldlt.compute(jac);
    f = scale.cwiseProduct(grad);
    d = -scale.cwiseProduct(ldlt.solve(f));
  }

  // One Newton step on G with backtracking from x; false if it cannot move.
  bool convex_step(double& g0) {
    g0 = convex_objective(x);
    if (!std::isfinite(g0))
      return false;
    balance_sides();
    for (int j = 0; j < n; ++j)
      grad[j] = p[j] - q[j];
    convex_direction();
    if (!d.allFinite())
      return false;
    limit_step();
    const double slope = grad.dot(d);
    return slope < 0.0 && line_search(g0, slope);
  }

  Result<void> iterate(const Conditions& cond, Speciation& out) {
    // A start so far off that exp() overflows: lower every unknown until it fits.
    double g0 = convex_objective(x);
    for (int tries = 0; !std::isfinite(g0) && tries < 200; ++tries) {
      x.array() -= kLn10;
      g0 = convex_objective(x);
    }
    int it = 0;
    double residual = std::numeric_limits<double>::infinity();
    for (;; ++it) {
      if (!std::isfinite(g0))
        break;
      balance_sides();
      residual = max_relative_residual();
      if (residual <= options.relative_tolerance) {
        finish(cond, out, it);
        return {};
      }
      if (it >= options.max_iterations)
        break;
      for (int j = 0; j < n; ++j) {
        grad[j] = p[j] - q[j];
        f[j] = std::log(p[j] / q[j]);
      }
      build_log_jacobian();
      lu.compute(jac);
      d = -lu.solve(f);
      bool moved = false;
      if (d.allFinite()) {
        limit_step();
        const double slope = grad.dot(d);
        if (residual < kCloseResidual || std::abs(slope) < kResolvableSlope * g_scale()) {
          // G cannot judge this step: its change is below its rounding error
          // (near the solution, or a component whose total is decades below the
          // others). Judge it by the log residual instead.
          moved = residual_line_search(g0);
        } else if (slope < 0.0) {
          x_start = x;
          const double g_start = g0;
          moved = line_search(g0, slope);
          if (moved && last_step < 1.0) {
            // The log-residual step had to be cut back: far from the solution it
            // can point along a valley of G. Compare with the convex Newton step
            // from the same point and keep the lower G.
            x_best = x;
            const double g_best = g0;
            x = x_start;
            g0 = g_start;
            if (!convex_step(g0) || g0 > g_best) {
              x = x_best;
              g0 = convex_objective(x);
            }
          }
        }
      }
      if (!moved) {
        if (!convex_step(g0)) {
          g0 = convex_objective(x);
          break;
        }
      }
    }
    std::string detail;
    if (std::isfinite(g0)) {
      balance_sides();
      const int w = worst_unknown();
      detail = "; the balance of '" +
               system.components[static_cast<std::size_t>(unknown_component[w])].name +
               "' is still off by " + format_number(max_relative_residual()) + " (relative)";
    }
    return make_error(ErrorKind::no_convergence,
                      "equilibrium solver did not converge after " + std::to_string(it) +
                          " iterations for the " + describe(cond) + detail +
                          "; check the constants and totals, or raise max_iterations");
  }

  void finish(const Conditions& cond, Speciation& out, int iterations) {
    const auto nsp = system.species.size();
    out.free_mol_per_l.resize(static_cast<std::size_t>(nc));
    out.log10_free.resize(static_cast<std::size_t>(nc));
    out.species_mol_per_l.assign(nsp, 0.0);
    for (int j = 0; j < nc; ++j) {
      out.free_mol_per_l[static_cast<std::size_t>(j)] = 0.0;
      out.log10_free[static_cast<std::size_t>(j)] = -std::numeric_limits<double>::infinity();
    }
    for (int i = 0; i < m; ++i) {
      const int row = active_row[i];
      if (row < nc) {
        out.free_mol_per_l[static_cast<std::size_t>(row)] = c[i];
        out.log10_free[static_cast<std::size_t>(row)] = x[unknown_of_component[row]] / kLn10;
      } else {
        out.species_mol_per_l[static_cast<std::size_t>(row - nc)] = c[i];
      }
    }
    for (int i = 0; i < n_fixed; ++i) {
      if (fixed_row[i] >= nc) {
        out.species_mol_per_l[static_cast<std::size_t>(fixed_row[i] - nc)] = std::exp(fixed_lnk[i]);
      }
    }
    const int h = system.proton;
    if (h >= 0) {
      double log10_h;
      if (cond.ph) {
        log10_h = ln_h_fixed / kLn10;
        out.free_mol_per_l[static_cast<std::size_t>(h)] = std::exp(ln_h_fixed);
        out.log10_free[static_cast<std::size_t>(h)] = log10_h;
      } else {
        log10_h = x[unknown_of_component[h]] / kLn10;
      }
      out.ph =
          -(log10_h + (corrected ? davies_log10_activity_coefficient(1, ionic_strength) : 0.0));
    } else {
      out.ph = std::numeric_limits<double>::quiet_NaN();
    }
    out.ionic_strength_mol_per_l = ionic_strength;
    out.iterations = iterations;
    out.max_relative_residual = max_relative_residual();
  }

  void cold_start(const Conditions& cond) {
    initial_guess(cond);
    clip_start();
  }

  void initial_guess(const Conditions& cond) {
    for (int u = 0; u < n; ++u) {
      const int j = unknown_component[u];
      // A free concentration cannot exceed its total; the proton starts neutral.
      x[u] = j == system.proton ? -7.0 * kLn10
                                : std::log(cond.total_mol_per_l[static_cast<std::size_t>(j)]);
    }
  }

  // No species can hold more of a metal or ligand than its total (over its
  // coefficient). Starting from the totals, strong complexes break that bound by
  // up to 30 decades; lowering the free concentrations of their metal and ligand
  // until every species is within bounds puts the start where Newton's method
  // converges in a few steps (the idea of the positive continuous fraction start
  // of J. Carrayrou, R. Mose and P. Behra, AIChE Journal 48 (2002) 894).
  void clip_start() {
    const int h = system.proton >= 0 ? unknown_of_component[system.proton] : -1;
    for (int sweep = 0; sweep < 8; ++sweep) {
      bool changed = false;
      for (int i = 0; i < m; ++i) {
        double e = lnk[i];
        double ln_bound = std::numeric_limits<double>::infinity();
        double sum_a = 0.0;
        for (int t = 0; t < nnz[i]; ++t) {
          const int u = idx[i][t];
          e += coef[i][t] * x[u];
          if (u == h)
            continue;
          ln_bound = std::min(ln_bound, std::log(t_pos[u] / coef[i][t]));
          sum_a += coef[i][t];
        }
        const double excess = e - ln_bound;
        if (sum_a > 0.0 && excess > 1e-3) {
          for (int t = 0; t < nnz[i]; ++t) {
            if (idx[i][t] != h)
              x[idx[i][t]] -= excess / sum_a;
          }
          changed = true;
        }
      }
      if (!changed)
        break;
    }
  }
};

EquilibriumSolver::EquilibriumSolver(std::unique_ptr<Impl> impl) : impl_(std::move(impl)) {}
EquilibriumSolver::EquilibriumSolver(EquilibriumSolver&&) noexcept = default;
EquilibriumSolver& EquilibriumSolver::operator=(EquilibriumSolver&&) noexcept = default;
EquilibriumSolver::~EquilibriumSolver() = default;

Result<EquilibriumSolver> EquilibriumSolver::create(ChemicalSystem system, SolverOptions options) {
  if (auto ok = system.validate(); !ok)
    return ok.error();
  if (!(options.max_iterations > 0) || !(options.relative_tolerance > 0.0) ||
      !(options.max_step_log10 > 0.0) || options.max_backtracks < 0 ||
      !(options.armijo > 0.0 && options.armijo < 0.5)) {
    return make_error(ErrorKind::invalid_input,
                      "solver options out of range: max_iterations > 0, relative_tolerance > 0, "
                      "max_step_log10 > 0, max_backtracks >= 0, 0 < armijo < 0.5");
  }
  return EquilibriumSolver(std::make_unique<Impl>(std::move(system), options));
}

const ChemicalSystem& EquilibriumSolver::system() const {
  return impl_->system;
}
const SolverOptions& EquilibriumSolver::options() const {
  return impl_->options;
}

Result<void> EquilibriumSolver::solve(const Conditions& conditions, Speciation& out) {
  if (auto ok = impl_->check_conditions(conditions); !ok)
    return ok;
  if (auto ok = impl_->setup(conditions); !ok)
    return ok;
  impl_->cold_start(conditions);
  return impl_->iterate(conditions, out);
}

Result<void> EquilibriumSolver::solve_from(const Conditions& conditions, const Speciation& start,
                                           Speciation& out) {
  Impl& s = *impl_;
  if (auto ok = s.check_conditions(conditions); !ok)
    return ok;
  if (auto ok = s.setup(conditions); !ok)
    return ok;
  if (start.log10_free.size() != static_cast<std::size_t>(s.nc)) {
    s.cold_start(conditions);
  } else {
    s.initial_guess(conditions);
    for (int u = 0; u < s.n; ++u) {
      const double v = start.log10_free[static_cast<std::size_t>(s.unknown_component[u])];
      if (std::isfinite(v))
        s.x[u] = v * kLn10;
    }
  }
  return s.iterate(conditions, out);
}

Result<Speciation> EquilibriumSolver::solve(const Conditions& conditions) {
  Speciation out;
  if (auto ok = solve(conditions, out); !ok)
    return ok.error();
  return out;
}

}  // namespace veq::chemistry
