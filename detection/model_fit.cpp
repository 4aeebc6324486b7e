// The only translation unit that includes Eigen's nonlinear least-squares
// module (it must never meet the older NonLinearOptimization module, which
// defines a class of the same name).
#include "detection/model_fit.hpp"

#include <Eigen/Dense>
#include <algorithm>
#include <cmath>
#include <memory>
#include <numeric>
#include <stdexcept>
#include <string>
#include <unsupported/Eigen/LevenbergMarquardt>
#include <utility>
#include <vector>

#include "chemistry/conditional.hpp"
#include "chemistry/one_to_one.hpp"
#include "chemistry/prediction.hpp"
#include "detection/fit_support.hpp"
#include "detection/local_fit.hpp"

namespace veq::detection {

const char* model_level_name(ModelLevel level) noexcept {
  switch (level) {
    case ModelLevel::automatic:
      return "automatic";
    case ModelLevel::one_to_one:
      return "one_to_one";
    case ModelLevel::speciation:
      return "speciation";
  }
  return "automatic";
}

std::optional<ModelLevel> model_level_from_name(std::string_view name) {
  for (ModelLevel l : {ModelLevel::automatic, ModelLevel::one_to_one, ModelLevel::speciation}) {
    if (name == model_level_name(l))
      return l;
  }
  return std::nullopt;
}

nlohmann::json to_json(const ModelFitOptions& options) {
  nlohmann::json j = {{"level", model_level_name(options.level)},
                      {"fit_constants", options.fit_constants},
                      {"slope_mv_per_decade", options.slope_mv_per_decade},
                      {"fit_lag", options.fit_lag},
                      {"fit_drift", options.fit_drift},
                      {"max_evaluations", options.max_evaluations}};
  if (options.sample)
    j["sample"] = chemistry::to_json(*options.sample);
  return j;
}

namespace {

veq::Error model_fit_option_error(const std::string& field, const std::string& what) {
  return veq::make_error(veq::ErrorKind::invalid_input, "model option '" + field + "': " + what);
}

veq::Error model_fit_invalid(std::string message) {
  return veq::make_error(veq::ErrorKind::invalid_input, std::move(message));
}

constexpr double kLn10 = 2.302585092994045684;

}  // namespace

veq::Result<void> validate(const ModelFitOptions& o) {
  if (!std::isfinite(o.slope_mv_per_decade) || o.slope_mv_per_decade < 0.0)
    return model_fit_option_error("slope_mv_per_decade", "must be a finite number >= 0 (0 = fit)");
  if (o.max_evaluations < 10 || o.max_evaluations > 100000)
    return model_fit_option_error("max_evaluations", "must lie within 10..100000");
  return {};
}

veq::Result<ModelFitOptions> model_fit_options_from_json(const nlohmann::json& json) {
  if (!json.is_object())
    return model_fit_invalid("model options must be a JSON object");
  ModelFitOptions o;
  for (const auto& [key, value] : json.items()) {
    if (key == "level") {
      const auto level = value.is_string() ? model_level_from_name(value.get<std::string>())
                                           : std::optional<ModelLevel>{};
      if (!level)
        return model_fit_option_error(key,
                                      "must be \"automatic\", \"one_to_one\" or \"speciation\"");
      o.level = *level;
    } else if (key == "fit_constants" || key == "fit_lag" || key == "fit_drift") {
      if (!value.is_boolean())
        return model_fit_option_error(key, "must be true or false");
      (key == "fit_constants" ? o.fit_constants
       : key == "fit_lag"     ? o.fit_lag
                              : o.fit_drift) = value.get<bool>();
    } else if (key == "slope_mv_per_decade") {
      if (!value.is_number())
        return model_fit_option_error(key, "must be a number");
      o.slope_mv_per_decade = value.get<double>();
    } else if (key == "max_evaluations") {
      if (!value.is_number_integer())
        return model_fit_option_error(key, "must be an integer");
      o.max_evaluations = value.get<int>();
    } else if (key == "sample") {
      auto sample = fit_support::sample_from_option(value);
      if (!sample)
        return model_fit_option_error(key, sample.error().message);
      o.sample = std::move(*sample);
    } else {
      return model_fit_option_error(
          key,
          "unknown option; known: level, fit_constants, slope_mv_per_decade, "
          "fit_lag, fit_drift, max_evaluations, sample");
    }
  }
  if (auto ok = validate(o); !ok)
    return ok.error();
  return o;
}

namespace {

// ---------------------------------------------------------------- chemistry

// What the chemistry gives at each measured volume for one set of chemistry
// parameters: the signal's basis and its derivatives. For an electrode or
// pM, one group: log10 of the free signal metal. For absorbance, the
// concentrations (mol/L) of the absorbing groups; the signal is a linear
// combination of them with fitted absorptivities (times the path).
struct Basis {
  std::size_t points = 0;
  std::size_t groups = 0;
  std::size_t params = 0;
  std::vector<double> value;       // [i * groups + g]
  std::vector<double> derivative;  // [(i * groups + g) * params + k]

  void resize(std::size_t n, std::size_t g, std::size_t p) {
    points = n;
    groups = g;
    params = p;
    value.assign(n * g, 0.0);
    derivative.assign(n * g * p, 0.0);
  }
  double& at(std::size_t i, std::size_t g) { return value[i * groups + g]; }
  double at(std::size_t i, std::size_t g) const { return value[i * groups + g]; }
  double& d(std::size_t i, std::size_t g, std::size_t k) {
    return derivative[(i * groups + g) * params + k];
  }
  double d(std::size_t i, std::size_t g, std::size_t k) const {
    return derivative[(i * groups + g) * params + k];
  }
};

enum class SignalModel { electrode, p_metal, absorbance };

// Chemistry parameters: for each metal of the sample (sample order) the
// natural log of its equivalence volume (its amount over the titrant
// concentration), then, when fitted, each metal's constant (log10 K' at the
// one_to_one level, a shift of log10 of every metal-titrant constant at the
// speciation level).
class Chemistry {
 public:
  virtual ~Chemistry() = default;
  virtual std::size_t metals() const = 0;
  virtual std::size_t groups() const = 0;
  virtual std::vector<std::string> group_names() const = 0;
  virtual veq::Result<void> evaluate(const std::vector<double>& p, Basis& out,
                                     bool derivatives = true) = 0;
  // The equilibrium signal basis at one volume (for the endpoint's signal).
  virtual veq::Result<std::vector<double>> basis_at(const std::vector<double>& p,
                                                    double volume_ml) = 0;
  std::size_t parameter_count() const { return metals() * (fit_constants ? 2 : 1); }
  bool fit_constants = true;
  std::vector<double> fixed_constants;  // used when not fitted
  double constant(const std::vector<double>& p, std::size_t m) const {
    return fit_constants ? p[metals() + m] : fixed_constants[m];
  }
};

// The exact 1:1 closed form (chemistry/one_to_one.hpp) with its derivatives:
// m = [M'] solves F = K m^2 + (1 + K (cy - cm)) m - cm = 0, so
// dm = -(F_K dK + F_cm dcm) / F_m with F_m = 2 K m + b = sqrt(b^2 + 4 K cm),
// F_K = m^2 + (cy - cm) m, F_cm = -(K m + 1).
class OneToOneChemistry final : public Chemistry {
 public:
  OneToOneChemistry(std::vector<double> volume_ml, double sample_ml, double titrant_mol_per_l,
                    double log10_alpha_metal, SignalModel signal)
      : v_(std::move(volume_ml)),
        sample_ml_(sample_ml),
        titrant_(titrant_mol_per_l),
        log10_alpha_(log10_alpha_metal),
        signal_(signal) {}
  std::size_t metals() const override { return 1; }
  std::size_t groups() const override { return signal_ == SignalModel::absorbance ? 3 : 1; }
  std::vector<std::string> group_names() const override {
    if (signal_ == SignalModel::absorbance)
      return {"metal", "chelate", "titrant"};
    return {"log10_free_metal"};
  }

  // One point: the group values and their derivatives wrt (ln Ve, log10 K'),
  // for Ve and K given (computed once per curve by the caller).
  void point(double v, double ve, double k, double* value, double* d_q, double* d_k) const {
    const double inverse_total = 1.0 / (sample_ml_ + v);
    const double cm = titrant_ * ve * inverse_total;
    const double cy = titrant_ * v * inverse_total;
    const double b = 1.0 + k * (cy - cm);
    const double root = std::sqrt(b * b + 4.0 * k * cm);
    const double m = b >= 0.0 ? 2.0 * cm / (b + root) : (-b + root) / (2.0 * k);
    const double inverse_root = 1.0 / root;
    const double dm_dq = (k * m + 1.0) * cm * inverse_root;                    // dcm/dq = cm
    const double dm_dk = -(m * m + (cy - cm) * m) * inverse_root * k * kLn10;  // dK/dlogK = K ln10
    if (signal_ != SignalModel::absorbance) {
      const double scale = 1.0 / (m * kLn10);
      value[0] = std::log10(m) - log10_alpha_;
      d_q[0] = dm_dq * scale;
      d_k[0] = dm_dk * scale;
      return;
    }
    // Metal not bound, chelate, free titrant.
    value[0] = m;
    value[1] = cm - m;
    value[2] = cy - cm + m;
    d_q[0] = dm_dq;
    d_q[1] = cm - dm_dq;
    d_q[2] = -cm + dm_dq;
    d_k[0] = dm_dk;
    d_k[1] = -dm_dk;
    d_k[2] = dm_dk;
  }

  veq::Result<void> evaluate(const std::vector<double>& p, Basis& out, bool) override {
    const std::size_t g = groups();
    out.resize(v_.size(), g, parameter_count());
    double value[3], dq[3], dk[3];
    const double ve = std::exp(p[0]);
    const double k = std::pow(10.0, constant(p, 0));
    for (std::size_t i = 0; i < v_.size(); ++i) {
      point(v_[i], ve, k, value, dq, dk);
      for (std::size_t j = 0; j < g; ++j) {
        out.at(i, j) = value[j];
        out.d(i, j, 0) = dq[j];
        if (fit_constants)
          out.d(i, j, 1) = dk[j];
      }
    }
    return {};
  }

  veq::Result<std::vector<double>> basis_at(const std::vector<double>& p,
                                            double volume_ml) override {
    double value[3], dq[3], dk[3];
    point(volume_ml, std::exp(p[0]), std::pow(10.0, constant(p, 0)), value, dq, dk);
    return std::vector<double>(value, value + groups());
  }

 private:
  std::vector<double> v_;
  double sample_ml_;
  double titrant_;
  double log10_alpha_;
  SignalModel signal_;
};

// The general solver at every point, with sensitivities by implicit
// differentiation of the mass balances at the solution: with T_j = x_j +
// sum_i a_ij c_i and c_i = beta_i prod_k x_k^a_ik,
//   J d(ln x) = dT - sum_i a_i c_i d(ln beta_i),  J_jk = d_jk x_j + sum_i a_ij a_ik c_i,
// over the components that are variables (positive total; H+ too when pH
// follows the proton balance).
class SpeciationChemistry final : public Chemistry {
 public:
  static veq::Result<std::unique_ptr<SpeciationChemistry>> create(
      const chemistry::ConstantsLibrary& library, const fit_support::SampleChemistry& chem,
      std::vector<double> volume_ml, SignalModel signal) {
    auto model = chemistry::TitrationModel::create(library, chem.sample);
    if (!model)
      return model.error();
    if (signal == SignalModel::absorbance && model->indicator_component() < 0) {
      return model_fit_invalid(
          "the speciation model describes absorbance through an indicator; the sample has none");
    }
    std::unique_ptr<SpeciationChemistry> c(
        new SpeciationChemistry(std::move(*model), std::move(volume_ml), signal));
    const auto& sys = c->model_.system();
    const auto tc = static_cast<std::size_t>(c->model_.titrant_component());
    const std::size_t nm = c->model_.sample().metals.size();
    c->shifted_.assign(nm, {});
    for (std::size_t s = 0; s < sys.species.size(); ++s) {
      const auto& st = sys.species[s].stoichiometry;
      for (std::size_t m = 0; m < nm; ++m) {
        if (st[tc] != 0 && st[static_cast<std::size_t>(c->model_.metal_component(m))] != 0)
          c->shifted_[m].push_back(s);
      }
    }
    for (std::size_t m = 0; m < nm; ++m)
      c->nominal_ml_.push_back(c->model_.metal_volume_ml(m));
    c->signal_metal_ = chem.signal_metal;
    c->conditions_.resize(c->v_.size());
    for (std::size_t i = 0; i < c->v_.size(); ++i)
      c->model_.conditions_at(c->v_[i], c->conditions_[i]);
    c->previous_.resize(c->v_.size());
    return c;
  }

  std::size_t metals() const override { return nominal_ml_.size(); }
  std::size_t groups() const override { return signal_ == SignalModel::absorbance ? 2 : 1; }
  std::vector<std::string> group_names() const override {
    if (signal_ == SignalModel::absorbance)
      return {"indicator_free", "indicator_bound"};
    return {"log10_free_metal"};
  }
  double nominal_ml(std::size_t m) const { return nominal_ml_[m]; }

  veq::Result<void> evaluate(const std::vector<double>& p, Basis& out, bool derivatives) override {
    if (auto ok = prepare_solver(p); !ok)
      return ok;
    const std::size_t np = parameter_count();
    out.resize(v_.size(), groups(), np);
    for (std::size_t i = 0; i < v_.size(); ++i) {
      scale_conditions(p, conditions_[i]);
      auto solved = solve(i);
      if (!solved)
        return solved;
      sensitivities(p, work_, i, out, derivatives);
    }
    have_previous_ = true;
    return {};
  }

  veq::Result<std::vector<double>> basis_at(const std::vector<double>& p,
                                            double volume_ml) override {
    if (auto ok = prepare_solver(p); !ok)
      return ok.error();
    chemistry::Conditions c;
    model_.conditions_at(volume_ml, c);
    scale_conditions(p, c);
    chemistry::Speciation s;
    auto solved = solver_->solve(work_conditions_, s);
    if (!solved)
      return solved.error();
    Basis one;
    one.resize(1, groups(), parameter_count());
    sensitivities(p, s, 0, one, false);
    return std::vector<double>(one.value.begin(), one.value.end());
  }

 private:
  SpeciationChemistry(chemistry::TitrationModel model, std::vector<double> v, SignalModel signal)
      : model_(std::move(model)), v_(std::move(v)), signal_(signal) {}

  veq::Result<void> prepare_solver(const std::vector<double>& p) {
    std::vector<double> shift(metals(), 0.0);
    if (fit_constants) {
      for (std::size_t m = 0; m < metals(); ++m)
        shift[m] = p[metals() + m];
    } else {
      shift = fixed_constants;
    }
    if (solver_ && shift == solver_shift_)
      return {};
    chemistry::ChemicalSystem system = model_.system();
    for (std::size_t m = 0; m < metals(); ++m) {
      for (std::size_t s : shifted_[m])
        system.species[s].log10_beta += shift[m];
    }
    // Mass balances to 1e-9 of each total instead of the solver's default
    // 1e-10: the fitted signal then moves by well under 1e-6 of a decade of
    // the free metal (far below any noise), and warm starts need one Newton
    // step fewer; the derivatives are analytic, so no finite difference
    // amplifies the difference.
    chemistry::SolverOptions solver_options;
    solver_options.relative_tolerance = 1e-9;
    auto solver = chemistry::EquilibriumSolver::create(std::move(system), solver_options);
    if (!solver)
      return solver.error();
    solver_ = std::make_unique<chemistry::EquilibriumSolver>(std::move(*solver));
    solver_shift_ = shift;
    return {};
  }

  void scale_conditions(const std::vector<double>& p, const chemistry::Conditions& nominal) {
    work_conditions_ = nominal;
    for (std::size_t m = 0; m < metals(); ++m) {
      const auto mc = static_cast<std::size_t>(model_.metal_component(m));
      work_conditions_.total_mol_per_l[mc] *= std::exp(p[m]) / nominal_ml_[m];
    }
  }

  veq::Result<void> solve(std::size_t i) {
    // Warm starts: from this point's last solution, or on the first pass
    // from the point before (neighbouring volumes differ little).
    veq::Result<void> solved =
        have_previous_ ? solver_->solve_from(work_conditions_, previous_[i], work_)
        : i > 0        ? solver_->solve_from(work_conditions_, previous_[i - 1], work_)
                       : solver_->solve(work_conditions_, work_);
    if (!solved && (have_previous_ || i > 0))
      solved = solver_->solve(work_conditions_, work_);
    if (!solved)
      return solved;
    previous_[i] = work_;
    return {};
  }

  // Values and derivatives of the groups at point i from the speciation s
  // (solved for work_conditions_).
  void sensitivities(const std::vector<double>& p, const chemistry::Speciation& s, std::size_t i,
                     Basis& out, bool with_derivatives = true) {
    const auto& sys = solver_->system();
    const std::size_t nc = sys.components.size();
    const auto& total = work_conditions_.total_mol_per_l;
    const bool ph_fixed = work_conditions_.ph.has_value();
    const auto metal_comp = static_cast<std::size_t>(model_.metal_component(signal_metal_));
    const auto ic = model_.indicator_component();
    // Values.
    if (signal_ == SignalModel::absorbance) {
      const auto icu = static_cast<std::size_t>(ic);
      double free = s.free_mol_per_l[icu], bound = 0.0;
      for (std::size_t k = 0; k < sys.species.size(); ++k) {
        const auto& st = sys.species[k].stoichiometry;
        if (st[icu] <= 0)
          continue;
        (has_metal(st) ? bound : free) += st[icu] * s.species_mol_per_l[k];
      }
      out.at(i, 0) = free;
      out.at(i, 1) = bound;
    } else {
      out.at(i, 0) = s.log10_free[metal_comp];
    }
    if (!with_derivatives)
      return;
    // Variables.
    active_.clear();
    for (std::size_t j = 0; j < nc; ++j) {
      if (j == 0 ? !ph_fixed : total[j] > 0.0)
        active_.push_back(j);
    }
    const std::size_t na = active_.size();
    jac_.setZero(static_cast<Eigen::Index>(na), static_cast<Eigen::Index>(na));
    for (std::size_t a = 0; a < na; ++a)
      jac_(static_cast<Eigen::Index>(a), static_cast<Eigen::Index>(a)) =
          s.free_mol_per_l[active_[a]];
    for (std::size_t k = 0; k < sys.species.size(); ++k) {
      const double c = s.species_mol_per_l[k];
      if (c == 0.0)
        continue;
      const auto& st = sys.species[k].stoichiometry;
      for (std::size_t a = 0; a < na; ++a) {
        const int sa = st[active_[a]];
        if (sa == 0)
          continue;
        for (std::size_t b = 0; b < na; ++b) {
          const int sb = st[active_[b]];
          if (sb != 0)
            jac_(static_cast<Eigen::Index>(a), static_cast<Eigen::Index>(b)) += sa * sb * c;
        }
      }
    }
    // Row scaling by each balance's size keeps the solve well conditioned
    // when totals differ by many decades.
    scale_.resize(static_cast<Eigen::Index>(na));
    for (std::size_t a = 0; a < na; ++a) {
      double size = 0.0;
      for (std::size_t b = 0; b < na; ++b)
        size = std::max(size,
                        std::abs(jac_(static_cast<Eigen::Index>(a), static_cast<Eigen::Index>(b))));
      scale_(static_cast<Eigen::Index>(a)) = size > 0.0 ? 1.0 / size : 1.0;
    }
    jac_ = scale_.asDiagonal() * jac_;
    lu_.compute(jac_);
    const std::size_t np = parameter_count();
    rhs_.setZero(static_cast<Eigen::Index>(na), static_cast<Eigen::Index>(np));
    for (std::size_t m = 0; m < metals(); ++m) {
      const auto mc = static_cast<std::size_t>(model_.metal_component(m));
      for (std::size_t a = 0; a < na; ++a) {
        if (active_[a] == mc)
          rhs_(static_cast<Eigen::Index>(a), static_cast<Eigen::Index>(m)) = total[mc];
      }
      if (fit_constants) {
        for (std::size_t k : shifted_[m]) {
          const double c = s.species_mol_per_l[k];
          const auto& st = sys.species[k].stoichiometry;
          for (std::size_t a = 0; a < na; ++a)
            rhs_(static_cast<Eigen::Index>(a), static_cast<Eigen::Index>(metals() + m)) -=
                st[active_[a]] * c * kLn10;
        }
      }
    }
    rhs_ = scale_.asDiagonal() * rhs_;
    dlnx_ = lu_.solve(rhs_);  // na x np: d ln x_active / d p
    if (signal_ != SignalModel::absorbance) {
      for (std::size_t a = 0; a < na; ++a) {
        if (active_[a] != metal_comp)
          continue;
        for (std::size_t k = 0; k < np; ++k)
          out.d(i, 0, k) =
              dlnx_(static_cast<Eigen::Index>(a), static_cast<Eigen::Index>(k)) / kLn10;
      }
      return;
    }
    // Absorbance groups: dc = c (sum_k a_k dln x_k + dln beta).
    const auto icu = static_cast<std::size_t>(ic);
    for (std::size_t k = 0; k < np; ++k) {
      double d_free = 0.0, d_bound = 0.0;
      for (std::size_t a = 0; a < na; ++a) {
        if (active_[a] == icu)
          d_free += s.free_mol_per_l[icu] *
                    dlnx_(static_cast<Eigen::Index>(a), static_cast<Eigen::Index>(k));
      }
      for (std::size_t sp = 0; sp < sys.species.size(); ++sp) {
        const auto& st = sys.species[sp].stoichiometry;
        if (st[icu] <= 0)
          continue;
        double dln = 0.0;
        for (std::size_t a = 0; a < na; ++a)
          dln += st[active_[a]] * dlnx_(static_cast<Eigen::Index>(a), static_cast<Eigen::Index>(k));
        if (fit_constants && k >= metals()) {
          const auto& list = shifted_[k - metals()];
          if (std::find(list.begin(), list.end(), sp) != list.end())
            dln += kLn10;
        }
        (has_metal(st) ? d_bound : d_free) += st[icu] * s.species_mol_per_l[sp] * dln;
      }
      out.d(i, 0, k) = d_free;
      out.d(i, 1, k) = d_bound;
    }
    (void)p;
  }

  bool has_metal(const std::vector<int>& st) const {
    for (std::size_t m = 0; m < metals(); ++m) {
      if (st[static_cast<std::size_t>(model_.metal_component(m))] != 0)
        return true;
    }
    return false;
  }

  chemistry::TitrationModel model_;
  std::vector<double> v_;
  SignalModel signal_;
  std::size_t signal_metal_ = 0;
  std::vector<std::vector<std::size_t>> shifted_;
  std::vector<double> nominal_ml_;
  std::vector<chemistry::Conditions> conditions_;
  std::vector<chemistry::Speciation> previous_;
  bool have_previous_ = false;
  std::unique_ptr<chemistry::EquilibriumSolver> solver_;
  std::vector<double> solver_shift_;
  chemistry::Conditions work_conditions_;
  chemistry::Speciation work_;
  std::vector<std::size_t> active_;
  Eigen::MatrixXd jac_, rhs_, dlnx_;
  Eigen::VectorXd scale_;
  Eigen::PartialPivLU<Eigen::MatrixXd> lu_;
};

// ---------------------------------------------------------------- the fit

// Parameters: [chemistry..., linear signal parameters..., ln(lag), drift].
struct Layout {
  std::size_t chemistry = 0;
  std::size_t linear = 0;  // electrode: E0 (and S); absorbance: one per group
  bool slope_free = false;
  double fixed_slope = 0.0;
  std::ptrdiff_t lag = -1;
  std::ptrdiff_t drift = -1;
  std::size_t size() const {
    return chemistry + linear + (lag >= 0 ? 1 : 0) + (drift >= 0 ? 1 : 0);
  }
};

// Bounds that keep every trial point physical (LM itself is unconstrained).
struct Bounds {
  std::vector<double> lo, hi;
};

class Problem : public Eigen::DenseFunctor<double> {
 public:
  Problem(Chemistry& chemistry, SignalModel signal, Layout layout, Bounds bounds,
          const std::vector<double>& y, const std::vector<double>& time_s)
      : Eigen::DenseFunctor<double>(static_cast<int>(layout.size()), static_cast<int>(y.size())),
        chemistry_(chemistry),
        signal_(signal),
        layout_(std::move(layout)),
        bounds_(std::move(bounds)),
        y_(y),
        t_(time_s) {}

  int operator()(const InputType& x, ValueType& fvec) {
    if (!compute(x))
      return -1;
    fvec = residual_;
    // Eigen's search can keep shrinking its trust region at the minimum
    // (its step-size test uses a norm of x that is only set after an
    // accepted step); evaluations that no longer lower the sum of squares
    // by more than the solver's rounding end it here.
    const double sse = residual_.squaredNorm();
    if (sse < best_sse_ * (1.0 - 1e-10)) {
      best_sse_ = sse;
      stalled_ = 0;
    } else if (++stalled_ >= kStalledEvaluations) {
      stalled_stop_ = true;
      return -1;
    }
    return 0;
  }
  bool stopped_at_minimum() const { return stalled_stop_; }
  int df(const InputType& x, JacobianType& fjac) {
    if (!(cached_ && x == cached_x_) && !compute(x))
      return -1;
    fjac = jacobian_;
    return 0;
  }

  // Clamped parameters (what the model uses) and whether each hit a bound.
  std::vector<double> clamp(const InputType& x, std::vector<bool>* at_limit = nullptr) const {
    std::vector<double> p(static_cast<std::size_t>(x.size()));
    if (at_limit)
      at_limit->assign(p.size(), false);
    for (std::size_t k = 0; k < p.size(); ++k) {
      const double v = x(static_cast<Eigen::Index>(k));
      p[k] = std::clamp(v, bounds_.lo[k], bounds_.hi[k]);
      if (at_limit && p[k] != v)
        (*at_limit)[k] = true;
    }
    return p;
  }

  bool compute(const InputType& x) {
    std::vector<bool> limited;
    const std::vector<double> p = clamp(x, &limited);
    const std::size_t n = y_.size(), np = layout_.size();
    std::vector<double> chem(p.begin(), p.begin() + static_cast<std::ptrdiff_t>(layout_.chemistry));
    auto ok = chemistry_.evaluate(chem, basis_);
    if (!ok) {
      error_ = ok.error().message;
      return false;
    }
    residual_.resize(static_cast<Eigen::Index>(n));
    jacobian_.setZero(static_cast<Eigen::Index>(n), static_cast<Eigen::Index>(np));
    equilibrium_.resize(n);
    const std::size_t lin = layout_.chemistry;
    // Equilibrium signal and its derivatives.
    for (std::size_t i = 0; i < n; ++i) {
      double eq = 0.0;
      auto row = jacobian_.row(static_cast<Eigen::Index>(i));
      switch (signal_) {
        case SignalModel::electrode: {
          const double slope = layout_.slope_free ? p[lin + 1] : layout_.fixed_slope;
          const double l = basis_.at(i, 0);
          eq = p[lin] + slope * l;
          for (std::size_t k = 0; k < layout_.chemistry; ++k)
            row(static_cast<Eigen::Index>(k)) = slope * basis_.d(i, 0, k);
          row(static_cast<Eigen::Index>(lin)) = 1.0;
          if (layout_.slope_free)
            row(static_cast<Eigen::Index>(lin + 1)) = l;
          break;
        }
        case SignalModel::p_metal: {
          eq = -basis_.at(i, 0);
          for (std::size_t k = 0; k < layout_.chemistry; ++k)
            row(static_cast<Eigen::Index>(k)) = -basis_.d(i, 0, k);
          break;
        }
        case SignalModel::absorbance: {
          for (std::size_t g = 0; g < basis_.groups; ++g) {
            const double eps = p[lin + g];
            eq += eps * basis_.at(i, g);
            row(static_cast<Eigen::Index>(lin + g)) = basis_.at(i, g);
            for (std::size_t k = 0; k < layout_.chemistry; ++k)
              row(static_cast<Eigen::Index>(k)) += eps * basis_.d(i, g, k);
          }
          break;
        }
      }
      equilibrium_[i] = eq;
      residual_(static_cast<Eigen::Index>(i)) = eq;
    }
    // First-order lag: o_i = e_i + (o_(i-1) - e_i) w_i, w_i = exp(-dt_i/lag);
    // derivatives through the same recursion.
    if (layout_.lag >= 0) {
      const auto lag_index = static_cast<Eigen::Index>(layout_.lag);
      const double lag = std::exp(p[static_cast<std::size_t>(layout_.lag)]);
      Eigen::RowVectorXd previous_row = jacobian_.row(0);
      previous_row(lag_index) = 0.0;
      double previous = equilibrium_[0];
      for (std::size_t i = 1; i < n; ++i) {
        const auto ii = static_cast<Eigen::Index>(i);
        const double dt = t_[i] - t_[i - 1];
        const double w = std::exp(-dt / lag);
        const double e = residual_(ii);
        const double o = e + (previous - e) * w;
        Eigen::RowVectorXd r = jacobian_.row(ii) * (1.0 - w) + previous_row * w;
        r(lag_index) = (previous - e) * w * dt / lag + previous_row(lag_index) * w;
        jacobian_.row(ii) = r;
        residual_(ii) = o;
        previous = o;
        previous_row = r;
      }
    }
    if (layout_.drift >= 0) {
      const auto di = static_cast<Eigen::Index>(layout_.drift);
      const double drift = p[static_cast<std::size_t>(layout_.drift)];
      for (std::size_t i = 0; i < n; ++i) {
        // drift in signal units per minute
        const double minutes = (t_[i] - t_[0]) / 60.0;
        residual_(static_cast<Eigen::Index>(i)) += drift * minutes;
        jacobian_(static_cast<Eigen::Index>(i), di) = minutes;
      }
    }
    for (std::size_t i = 0; i < n; ++i)
      residual_(static_cast<Eigen::Index>(i)) -= y_[i];
    // A parameter held at a bound does not move the model.
    for (std::size_t k = 0; k < np; ++k) {
      if (limited[k])
        jacobian_.col(static_cast<Eigen::Index>(k)).setZero();
    }
    cached_x_ = x;
    cached_ = true;
    return true;
  }

  const Eigen::VectorXd& residual() const { return residual_; }
  const Eigen::MatrixXd& jacobian() const { return jacobian_; }
  const std::vector<double>& equilibrium() const { return equilibrium_; }
  const Basis& basis() const { return basis_; }
  const std::string& error() const { return error_; }
  const Layout& layout() const { return layout_; }

 private:
  Chemistry& chemistry_;
  SignalModel signal_;
  Layout layout_;
  Bounds bounds_;
  const std::vector<double>& y_;
  const std::vector<double>& t_;
  Basis basis_;
  Eigen::VectorXd residual_;
  Eigen::MatrixXd jacobian_;
  std::vector<double> equilibrium_;
  Eigen::VectorXd cached_x_;
  bool cached_ = false;
  std::string error_;
  static constexpr int kStalledEvaluations = 8;
  double best_sse_ = INFINITY;
  int stalled_ = 0;
  bool stalled_stop_ = false;
};

// Linear signal parameters by least squares for given chemistry (no lag,
// no drift): returns them and the sum of squared residuals.
struct LinearFit {
  std::vector<double> parameters;
  double sse = INFINITY;
};

LinearFit linear_fit(const Basis& basis, SignalModel signal, const Layout& layout,
                     const std::vector<double>& y) {
  LinearFit out;
  const std::size_t n = y.size();
  if (signal == SignalModel::p_metal) {
    double sse = 0.0;
    for (std::size_t i = 0; i < n; ++i) {
      const double r = y[i] + basis.at(i, 0);
      sse += r * r;
    }
    out.sse = sse;
    return out;
  }
  const std::size_t m = layout.linear;
  Eigen::MatrixXd a(static_cast<Eigen::Index>(n), static_cast<Eigen::Index>(m));
  Eigen::VectorXd b(static_cast<Eigen::Index>(n));
  for (std::size_t i = 0; i < n; ++i) {
    const auto ii = static_cast<Eigen::Index>(i);
    if (signal == SignalModel::electrode) {
      a(ii, 0) = 1.0;
      if (layout.slope_free) {
        a(ii, 1) = basis.at(i, 0);
        b(ii) = y[i];
      } else {
        b(ii) = y[i] - layout.fixed_slope * basis.at(i, 0);
      }
    } else {
      for (std::size_t g = 0; g < m; ++g)
        a(ii, static_cast<Eigen::Index>(g)) = basis.at(i, g);
      b(ii) = y[i];
    }
  }
  // Column scaling for conditioning (concentrations are ~1e-4 mol/L).
  Eigen::VectorXd scale(static_cast<Eigen::Index>(m));
  for (std::size_t g = 0; g < m; ++g) {
    const double norm = a.col(static_cast<Eigen::Index>(g)).norm();
    scale(static_cast<Eigen::Index>(g)) = norm > 0.0 ? 1.0 / norm : 1.0;
  }
  const Eigen::MatrixXd scaled = a * scale.asDiagonal();
  const Eigen::VectorXd solution = scale.asDiagonal() * scaled.colPivHouseholderQr().solve(b);
  out.parameters.assign(solution.data(), solution.data() + m);
  out.sse = (a * solution - b).squaredNorm();
  if (!std::isfinite(out.sse))
    out.sse = INFINITY;
  return out;
}

// Median of the positive time steps, s.
double median_step_s(const std::vector<double>& t) {
  std::vector<double> steps;
  for (std::size_t i = 1; i < t.size(); ++i) {
    if (t[i] > t[i - 1])
      steps.push_back(t[i] - t[i - 1]);
  }
  if (steps.empty())
    return 0.0;
  std::nth_element(steps.begin(), steps.begin() + static_cast<std::ptrdiff_t>(steps.size() / 2),
                   steps.end());
  return steps[steps.size() / 2];
}

struct FitResult {
  bool ok = false;
  std::string error;
  std::vector<double> parameters;  // clamped
  std::vector<bool> at_limit;
  Eigen::VectorXd residual;
  Eigen::MatrixXd jacobian;
  std::vector<double> equilibrium;
  double sse = INFINITY;
  int evaluations = 0;
  int iterations = 0;
  bool converged = false;
};

FitResult levenberg_marquardt(Chemistry& chemistry, SignalModel signal, const Layout& layout,
                              const Bounds& bounds, const std::vector<double>& start,
                              const std::vector<double>& y, const std::vector<double>& t,
                              int max_evaluations) {
  Problem problem(chemistry, signal, layout, bounds, y, t);
  Eigen::VectorXd x =
      Eigen::Map<const Eigen::VectorXd>(start.data(), static_cast<Eigen::Index>(start.size()));
  Eigen::LevenbergMarquardt<Problem> lm(problem);
  // Tolerances well below the statistical precision of any parameter (an
  // equivalence volume is rarely known to better than 1e-5 of itself) but
  // above the precision of the equilibrium solver (mass balances to 1e-10),
  // whose rounding would otherwise keep the search going.
  lm.setXtol(1e-8);
  lm.setFtol(1e-8);
  lm.setMaxfev(max_evaluations);
  const auto status = lm.minimize(x);
  FitResult r;
  r.evaluations = static_cast<int>(lm.nfev());
  r.iterations = static_cast<int>(lm.iterations());
  const bool stalled =
      status == Eigen::LevenbergMarquardtSpace::UserAsked && problem.stopped_at_minimum();
  if ((status == Eigen::LevenbergMarquardtSpace::UserAsked && !stalled) ||
      status == Eigen::LevenbergMarquardtSpace::ImproperInputParameters) {
    r.error = problem.error().empty() ? std::string("the fit could not start") : problem.error();
    return r;
  }
  r.converged = status != Eigen::LevenbergMarquardtSpace::TooManyFunctionEvaluation;
  if (!problem.compute(x)) {
    r.error = problem.error();
    return r;
  }
  r.ok = true;
  r.parameters = problem.clamp(x, &r.at_limit);
  r.residual = problem.residual();
  r.jacobian = problem.jacobian();
  r.equilibrium = problem.equilibrium();
  r.sse = r.residual.squaredNorm();
  return r;
}

}  // namespace

veq::Result<Evaluation> fit_titration_model(const Curve& curve, const ModelFitOptions& options) {
  auto library = chemistry::builtin_constants_library();
  if (!library)
    return library.error();
  return fit_titration_model(curve, options, *library);
}

veq::Result<Evaluation> fit_titration_model(const Curve& curve, const ModelFitOptions& options,
                                            const chemistry::ConstantsLibrary& library) {
  if (auto ok = validate(options); !ok)
    throw std::invalid_argument(ok.error().message);
  if (!options.sample) {
    return model_fit_invalid(
        "the model fit needs the sample chemistry: give the option 'sample' (a sample document "
        "as for veq predict; on the command line --sample FILE)");
  }
  Evaluation result;
  result.method = "model";
  result.options = to_json(options);

  auto read = fit_support::read_sample(*options.sample, curve, library);
  if (!read)
    return read.error();
  const fit_support::SampleChemistry& chem = *read;
  const std::size_t n = curve.size();
  const auto& v = curve.volume_ml();

  // The signal.
  SignalModel signal;
  std::vector<double> y = curve.signal();
  switch (curve.kind()) {
    case SignalKind::potential_mv:
      signal = SignalModel::electrode;
      break;
    case SignalKind::p_metal:
      signal = SignalModel::p_metal;
      break;
    case SignalKind::absorbance:
      signal = SignalModel::absorbance;
      break;
    case SignalKind::transmittance:
      signal = SignalModel::absorbance;
      for (double& s : y) {
        if (!(s > 0.0)) {
          return model_fit_invalid(
              "the model fit cannot use a transmittance of 0 % or less (no absorbance); remove "
              "those readings");
        }
        s = -std::log10(s / 100.0);
      }
      break;
    case SignalKind::ph:
    default:
      return model_fit_invalid(
          "the model fit describes potential_mv, p_metal, absorbance or transmittance curves, "
          "not " +
          std::string(signal_kind_name(curve.kind())));
  }

  // The level.
  auto nominal_model = chemistry::TitrationModel::create(library, chem.sample);
  if (!nominal_model)
    return nominal_model.error();
  const std::size_t metals = chem.sample.metals.size();
  const bool has_indicator = chem.sample.indicator.has_value();
  ModelLevel level = options.level;
  if (level == ModelLevel::automatic) {
    const bool one_to_one_absorbance = signal == SignalModel::absorbance && !has_indicator;
    level = (nominal_model->closed_form().has_value() &&
             (signal != SignalModel::absorbance || one_to_one_absorbance)) ||
                    (one_to_one_absorbance && metals == 1)
                ? ModelLevel::one_to_one
                : ModelLevel::speciation;
  }
  if (level == ModelLevel::one_to_one) {
    if (metals != 1)
      return model_fit_invalid("the one_to_one model describes one metal; this sample has " +
                               std::to_string(metals) + " (use level speciation)");
    if (!chem.sample.ph)
      return model_fit_invalid(
          "the one_to_one model needs a fixed pH in the sample (use level speciation)");
  }

  // Conditional constant and side reaction at the sample's pH with its ligands
  // (the one_to_one level's constants, and its starting values).
  std::vector<chemistry::LigandTotal> ligands;
  for (const auto& l : chem.sample.ligands)
    ligands.push_back({l.name, l.total_mol_per_l});
  auto order = fit_support::titration_order(chem.sample, library);
  if (!order)
    return order.error();
  const double titrant = chem.sample.titrant.conc_mol_per_l;
  const double v0 = chem.sample_volume_ml;
  std::vector<double> nominal_ml(metals);
  for (std::size_t m = 0; m < metals; ++m)
    nominal_ml[m] = chem.sample.metals[m].conc_mol_per_l * v0 / titrant;

  const std::vector<double> time_s = curve.time_s();
  const bool timed = !time_s.empty() && time_s.back() > time_s.front();
  const double step_s = timed ? median_step_s(time_s) : 0.0;

  // Where the curve breaks: steepest fall of log10[M] (electrode: E / sign,
  // pM: -pM; absorbance: steepest change either way).
  std::vector<double> direction(n);
  double head = 0.0, tail = 0.0;
  const std::size_t fifth = std::max<std::size_t>(1, n / 5);
  for (std::size_t i = 0; i < fifth; ++i) {
    head += y[i];
    tail += y[n - 1 - i];
  }
  const double sign = head >= tail ? 1.0 : -1.0;
  for (std::size_t i = 0; i < n; ++i)
    direction[i] = sign * y[i];
  const auto steepest = fit_support::steepest_fall(v, direction);
  const double steepest_ml = steepest ? v[*steepest] : nominal_ml[(*order)[0]];

  const int charge = chem.metal_charge;
  const double temperature_c =
      fit_support::curve_temperature_c(curve, chem.sample.signal.temperature_c);
  const double nernst = fit_support::nernst_slope_mv(temperature_c, charge);

  // Build the chemistry.
  std::unique_ptr<Chemistry> chemistry_model;
  std::vector<double> start_constants(metals, 0.0);  // log10 K' or shifts
  double one_to_one_log_k = 0.0;
  if (level == ModelLevel::one_to_one) {
    const auto& m = chem.sample.metals[0];
    double log_k = 0.0, log_alpha = 0.0;
    if (nominal_model->closed_form()) {
      log_k = std::log10(nominal_model->closed_form()->conditional_constant);
      log_alpha = nominal_model->closed_form_log10_alpha_metal();
    } else {
      auto k = chemistry::conditional_constant(library, m.name, chem.sample.titrant.name,
                                               *chem.sample.ph, ligands);
      if (!k)
        return k.error();
      log_k = k->log10_conditional;
      log_alpha = k->log10_alpha_metal;
    }
    one_to_one_log_k = log_k;
    start_constants[0] = log_k;
    chemistry_model = std::make_unique<OneToOneChemistry>(v, v0, titrant, log_alpha, signal);
  } else {
    auto made = SpeciationChemistry::create(library, chem, v, signal);
    if (!made)
      return made.error();
    chemistry_model = std::move(*made);
  }
  chemistry_model->fit_constants = options.fit_constants;
  chemistry_model->fixed_constants = start_constants;

  // Layout and bounds.
  Layout layout;
  layout.chemistry = chemistry_model->parameter_count();
  if (signal == SignalModel::electrode) {
    layout.slope_free = options.slope_mv_per_decade == 0.0;
    layout.fixed_slope = sign * options.slope_mv_per_decade;
    layout.linear = layout.slope_free ? 2 : 1;
  } else if (signal == SignalModel::absorbance) {
    layout.linear = chemistry_model->groups();
  }
  Bounds bounds;
  const double end_ml = v.back();
  for (std::size_t m = 0; m < metals; ++m) {
    bounds.lo.push_back(std::log(1e-3 * end_ml));
    bounds.hi.push_back(std::log(3.0 * end_ml));
  }
  if (options.fit_constants) {
    for (std::size_t m = 0; m < metals; ++m) {
      if (level == ModelLevel::one_to_one) {
        bounds.lo.push_back(0.5);
        bounds.hi.push_back(30.0);
      } else {
        bounds.lo.push_back(-8.0);
        bounds.hi.push_back(8.0);
      }
    }
  }
  for (std::size_t k = 0; k < layout.linear; ++k) {
    bounds.lo.push_back(-INFINITY);
    bounds.hi.push_back(INFINITY);
  }

  // Starting values: candidate chemistry parameters, each scored by the
  // least-squares linear signal parameters it allows.
  Basis basis;
  auto score = [&](const std::vector<double>& chem_params) -> LinearFit {
    if (!chemistry_model->evaluate(chem_params, basis, false))
      return {};
    return linear_fit(basis, signal, layout, y);
  };
  auto chem_vector = [&](const std::vector<double>& volumes, const std::vector<double>& constants) {
    std::vector<double> p;
    for (double x : volumes)
      p.push_back(std::log(std::max(x, 1e-6)));
    if (options.fit_constants)
      p.insert(p.end(), constants.begin(), constants.end());
    return p;
  };
  std::vector<std::vector<double>> candidates;
  // One metal through the general solver: start from the fast 1:1 fit of
  // the same curve (its conditional constant, relative to the nominal one,
  // becomes the shift of the constants).
  std::optional<std::pair<double, double>> prefit;  // volume, shift
  if (level == ModelLevel::speciation && metals == 1 && signal != SignalModel::absorbance &&
      chem.sample.ph) {
    ModelFitOptions quick = options;
    quick.level = ModelLevel::one_to_one;
    quick.fit_lag = false;
    quick.fit_drift = false;
    auto first = fit_titration_model(curve, quick, library);
    if (first && !first->endpoints.empty()) {
      const auto& m = first->details["metals"][0];
      const double shift = options.fit_constants
                               ? m["log10_conditional_constant"].get<double>() -
                                     m["log10_conditional_constant_nominal"].get<double>()
                               : 0.0;
      prefit = {m["equivalence_volume_ml"].get<double>(), shift};
    }
  }
  if (prefit) {
    candidates.push_back(chem_vector({prefit->first}, {prefit->second}));
  } else if (metals == 1) {
    // The steepest point and the nominal amount; a weak break with a
    // constant far from the library's is caught by the two shifted ones.
    candidates.push_back(chem_vector({steepest_ml}, start_constants));
    candidates.push_back(chem_vector({nominal_ml[0]}, start_constants));
    if (options.fit_constants && level == ModelLevel::one_to_one) {
      for (double dk : {-1.5, 1.5}) {
        std::vector<double> k = start_constants;
        k[0] += dk;
        candidates.push_back(chem_vector({steepest_ml}, k));
      }
    }
  } else {
    // Nominal amounts, scaled together and apart.
    for (double f : {1.0, 0.9, 1.1, 0.8, 1.2}) {
      std::vector<double> volumes = nominal_ml;
      for (double& x : volumes)
        x *= f;
      candidates.push_back(chem_vector(volumes, start_constants));
    }
    // The total at the steepest break, split as the nominal amounts.
    const double total = std::accumulate(nominal_ml.begin(), nominal_ml.end(), 0.0);
    std::vector<double> volumes = nominal_ml;
    for (double& x : volumes)
      x *= steepest_ml / total;
    candidates.push_back(chem_vector(volumes, start_constants));
  }
  std::vector<double> best_chem;
  LinearFit best_linear;
  for (const auto& c : candidates) {
    LinearFit f = score(c);
    if (f.sse < best_linear.sse) {
      best_linear = std::move(f);
      best_chem = c;
    }
  }
  if (best_chem.empty()) {
    return veq::make_error(veq::ErrorKind::no_convergence,
                           "the model fit found no starting point at which the chemistry could "
                           "be computed; check the sample document against the curve");
  }
  std::vector<double> start = best_chem;
  start.insert(start.end(), best_linear.parameters.begin(), best_linear.parameters.end());
  if (signal == SignalModel::electrode && layout.slope_free &&
      !(start[layout.chemistry + 1] != 0.0))
    start[layout.chemistry + 1] = sign * nernst;

  // Stage 1: without lag and drift.
  FitResult fit = levenberg_marquardt(*chemistry_model, signal, layout, bounds, start, y, time_s,
                                      options.max_evaluations);
  if (!fit.ok)
    return veq::make_error(veq::ErrorKind::no_convergence, "the model fit failed: " + fit.error);
  int evaluations = fit.evaluations;

  // Stage 2: with lag and drift, from there.
  bool lag_used = false;
  if (timed && (options.fit_lag || options.fit_drift)) {
    Layout timed_layout = layout;
    Bounds timed_bounds = bounds;
    std::vector<double> timed_start = fit.parameters;
    std::size_t next = layout.size();
    if (options.fit_lag) {
      timed_layout.lag = static_cast<std::ptrdiff_t>(next++);
      timed_bounds.lo.push_back(std::log(1e-3 * step_s));
      timed_bounds.hi.push_back(std::log(100.0 * step_s));
      timed_start.push_back(std::log(0.3 * step_s));
    }
    if (options.fit_drift) {
      timed_layout.drift = static_cast<std::ptrdiff_t>(next++);
      timed_bounds.lo.push_back(-INFINITY);
      timed_bounds.hi.push_back(INFINITY);
      timed_start.push_back(0.0);
    }
    FitResult timed_fit = levenberg_marquardt(*chemistry_model, signal, timed_layout, timed_bounds,
                                              timed_start, y, time_s, options.max_evaluations);
    evaluations += timed_fit.evaluations;
    if (timed_fit.ok && timed_fit.sse <= fit.sse) {
      // A lag at its lower bound does nothing: drop it and refit without.
      if (timed_layout.lag >= 0 && timed_fit.at_limit[static_cast<std::size_t>(timed_layout.lag)] &&
          timed_fit.parameters[static_cast<std::size_t>(timed_layout.lag)] <
              timed_bounds.hi[static_cast<std::size_t>(timed_layout.lag)] - 1.0) {
        Layout no_lag = timed_layout;
        Bounds no_lag_bounds = bounds;
        std::vector<double> no_lag_start(
            timed_fit.parameters.begin(),
            timed_fit.parameters.begin() + static_cast<std::ptrdiff_t>(layout.size()));
        no_lag.lag = -1;
        if (options.fit_drift) {
          no_lag.drift = static_cast<std::ptrdiff_t>(layout.size());
          no_lag_bounds.lo.push_back(-INFINITY);
          no_lag_bounds.hi.push_back(INFINITY);
          no_lag_start.push_back(
              timed_fit.parameters[static_cast<std::size_t>(timed_layout.drift)]);
        }
        if (no_lag.drift >= 0) {
          FitResult refit = levenberg_marquardt(*chemistry_model, signal, no_lag, no_lag_bounds,
                                                no_lag_start, y, time_s, options.max_evaluations);
          evaluations += refit.evaluations;
          if (refit.ok) {
            fit = std::move(refit);
            layout = no_lag;
            bounds = no_lag_bounds;
          }
        }
      } else {
        fit = std::move(timed_fit);
        layout = timed_layout;
        bounds = timed_bounds;
        lag_used = layout.lag >= 0;
      }
    }
  }

  // Covariance.
  const std::size_t np = layout.size();
  const double dof = static_cast<double>(n) - static_cast<double>(np);
  const double residual_var = dof > 0.0 ? fit.sse / dof : fit.sse;
  double autocorrelation = 0.0;
  {
    double num = 0.0, den = 0.0;
    for (std::size_t i = 0; i < n; ++i) {
      const double r = fit.residual(static_cast<Eigen::Index>(i));
      den += r * r;
      if (i > 0)
        num += r * fit.residual(static_cast<Eigen::Index>(i - 1));
    }
    autocorrelation = den > 0.0 ? num / den : 0.0;
  }
  const double inflation = autocorrelation > 0.0
                               ? (1.0 + autocorrelation) / (1.0 - std::min(autocorrelation, 0.95))
                               : 1.0;
  Eigen::MatrixXd covariance =
      Eigen::MatrixXd::Zero(static_cast<Eigen::Index>(np), static_cast<Eigen::Index>(np));
  {
    // Scale columns before inverting J^T J; parameters held at a bound (zero
    // columns) get no variance.
    Eigen::VectorXd scale(static_cast<Eigen::Index>(np));
    for (std::size_t k = 0; k < np; ++k) {
      const double norm = fit.jacobian.col(static_cast<Eigen::Index>(k)).norm();
      scale(static_cast<Eigen::Index>(k)) = norm > 0.0 ? 1.0 / norm : 0.0;
    }
    const Eigen::MatrixXd js = fit.jacobian * scale.asDiagonal();
    const Eigen::MatrixXd normal = js.transpose() * js;
    const Eigen::MatrixXd inverse = normal.completeOrthogonalDecomposition().pseudoInverse();
    covariance = scale.asDiagonal() * inverse * scale.asDiagonal();
    covariance *= residual_var * inflation;
  }
  auto sd = [&](std::ptrdiff_t k) {
    return k >= 0 ? std::sqrt(std::max(0.0, covariance(k, k))) : 0.0;
  };

  // Endpoints: cumulative volumes in titration order.
  std::vector<double> volume(metals);
  for (std::size_t m = 0; m < metals; ++m)
    volume[m] = std::exp(fit.parameters[m]);
  std::vector<double> chem_params(
      fit.parameters.begin(),
      fit.parameters.begin() + static_cast<std::ptrdiff_t>(layout.chemistry));
  double cumulative = 0.0;
  const double lag_s =
      layout.lag >= 0 ? std::exp(fit.parameters[static_cast<std::size_t>(layout.lag)]) : 0.0;
  Eigen::VectorXd gradient = Eigen::VectorXd::Zero(static_cast<Eigen::Index>(np));
  std::vector<double> noise_scratch;
  const double noise = local_fit::noise_sd(v, y, noise_scratch);
  const double rms = std::sqrt(fit.sse / static_cast<double>(n));
  auto equilibrium_signal = [&](double at_ml) -> double {
    auto b = chemistry_model->basis_at(chem_params, at_ml);
    if (!b)
      return std::nan("");
    const std::size_t lin = layout.chemistry;
    switch (signal) {
      case SignalModel::electrode:
        return fit.parameters[lin] +
               (layout.slope_free ? fit.parameters[lin + 1] : layout.fixed_slope) * (*b)[0];
      case SignalModel::p_metal:
        return -(*b)[0];
      case SignalModel::absorbance: {
        double a = 0.0;
        for (std::size_t g = 0; g < b->size(); ++g)
          a += fit.parameters[lin + g] * (*b)[g];
        return a;
      }
    }
    return std::nan("");
  };
  for (std::size_t m : *order) {
    cumulative += volume[m];
    gradient(static_cast<Eigen::Index>(m)) = volume[m];  // d V / d ln V
    Endpoint e;
    e.volume_ml = cumulative;
    double variance = gradient.dot(covariance * gradient);
    if (lag_used) {
      // The lag model takes each dose as instantaneous, right after the
      // previous reading. A dose that lasts a noticeable part of the response
      // time crosses the equivalence point later than the model assumes, and
      // the reading after it has settled less: the endpoint can move by a
      // part of the step there that grows with the share still unsettled at
      // the reading, exp(-dt/lag). On simulated slow electrodes (response
      // 8 s, doses of 1.2 s, readings 10 s after them; scenario
      // slow_electrode) the errors stay within 0.3 of step x exp(-dt/lag);
      // half of that is taken as a standard uncertainty.
      const auto right = static_cast<std::size_t>(
          std::clamp<std::ptrdiff_t>(std::upper_bound(v.begin(), v.end(), cumulative) - v.begin(),
                                     1, static_cast<std::ptrdiff_t>(n - 1)));
      const double step_ml = v[right] - v[right - 1];
      const double unsettled = std::exp(-(time_s[right] - time_s[right - 1]) / lag_s);
      const double allowance = 0.15 * step_ml * unsettled;
      variance += allowance * allowance;
    }
    e.uncertainty_ml = std::sqrt(std::max(0.0, variance));
    e.signal = equilibrium_signal(cumulative);
    const double h = std::max(1e-4 * cumulative, 1e-6);
    e.steepness =
        std::abs(equilibrium_signal(cumulative + h) - equilibrium_signal(cumulative - h)) /
        (2.0 * h);
    if (curve.kind() == SignalKind::transmittance)
      e.signal = 100.0 * std::pow(10.0, -e.signal);
    if (fit.at_limit[m])
      e.flags.push_back(QualityFlag::parameter_at_limit);
    if (options.fit_constants && fit.at_limit[metals + m])
      e.flags.push_back(QualityFlag::parameter_at_limit);
    if (cumulative <= v.front() || cumulative >= v.back())
      e.flags.push_back(QualityFlag::near_curve_end);
    result.endpoints.push_back(std::move(e));
  }
  std::sort(result.endpoints.begin(), result.endpoints.end(),
            [](const Endpoint& a, const Endpoint& b) { return a.volume_ml < b.volume_ml; });

  // Whole-curve flags.
  if (!fit.converged)
    result.flags.push_back(QualityFlag::fit_not_converged);
  // Residuals well beyond the point-to-point noise, or strongly correlated
  // from point to point: the model misses something (factor 2 on the
  // scatter and 0.6 on the correlation: neither is reached by white noise
  // on curves of 30 points or more).
  if ((noise > 0.0 && rms > 2.0 * noise) || autocorrelation > 0.6)
    result.flags.push_back(QualityFlag::poor_fit);
  if (signal == SignalModel::electrode && layout.slope_free) {
    const double percent = 100.0 * std::abs(fit.parameters[layout.chemistry + 1]) / nernst;
    if (percent < 80.0 || percent > 105.0)
      result.flags.push_back(QualityFlag::unusual_slope);
  }

  // Details.
  nlohmann::json d;
  d["level"] = model_level_name(level);
  d["metals"] = nlohmann::json::array();
  for (std::size_t m = 0; m < metals; ++m) {
    nlohmann::json entry = {
        {"metal", chem.sample.metals[m].name},
        {"equivalence_volume_ml", volume[m]},
        {"equivalence_volume_uncertainty_ml", volume[m] * sd(static_cast<std::ptrdiff_t>(m))},
        {"conc_mol_per_l", volume[m] * titrant / v0}};
    if (options.fit_constants) {
      const auto k = static_cast<std::ptrdiff_t>(metals + m);
      if (level == ModelLevel::one_to_one) {
        entry["log10_conditional_constant"] = fit.parameters[metals + m];
        entry["log10_conditional_constant_uncertainty"] = sd(k);
        entry["log10_conditional_constant_nominal"] = one_to_one_log_k;
      } else {
        entry["log10_constant_shift"] = fit.parameters[metals + m];
        entry["log10_constant_shift_uncertainty"] = sd(k);
      }
    }
    d["metals"].push_back(entry);
  }
  const std::size_t lin = layout.chemistry;
  if (signal == SignalModel::electrode) {
    d["electrode_zero_mv"] = fit.parameters[lin];
    d["electrode_zero_uncertainty_mv"] = sd(static_cast<std::ptrdiff_t>(lin));
    const double slope = layout.slope_free ? fit.parameters[lin + 1] : layout.fixed_slope;
    d["slope_mv_per_decade"] = slope;
    d["slope_fitted"] = layout.slope_free;
    if (layout.slope_free)
      d["slope_uncertainty_mv_per_decade"] = sd(static_cast<std::ptrdiff_t>(lin + 1));
    d["slope_percent_of_nernst"] = 100.0 * std::abs(slope) / nernst;
  }
  if (signal == SignalModel::absorbance) {
    const auto names = chemistry_model->group_names();
    nlohmann::json eps;
    for (std::size_t g = 0; g < layout.linear; ++g) {
      eps[names[g]] = {{"value_l_per_mol", fit.parameters[lin + g]},
                       {"uncertainty_l_per_mol", sd(static_cast<std::ptrdiff_t>(lin + g))}};
    }
    d["absorptivity_times_path"] = eps;
  }
  if (layout.lag >= 0) {
    const double lag = std::exp(fit.parameters[static_cast<std::size_t>(layout.lag)]);
    d["lag_s"] = lag;
    d["lag_uncertainty_s"] = lag * sd(layout.lag);
  }
  if (layout.drift >= 0) {
    d["drift_per_min"] = fit.parameters[static_cast<std::size_t>(layout.drift)];
    d["drift_uncertainty_per_min"] = sd(layout.drift);
  }
  d["lag_fitted"] = lag_used;
  d["drift_fitted"] = layout.drift >= 0;
  d["rms_residual"] = rms;
  d["noise_sd"] = noise;
  d["residual_autocorrelation"] = autocorrelation;
  d["uncertainty_inflation"] = std::sqrt(inflation);
  d["evaluations"] = evaluations;
  d["converged"] = fit.converged;
  result.details = std::move(d);

  // Diagnostics.
  std::vector<double> fitted(n), residuals(n);
  for (std::size_t i = 0; i < n; ++i) {
    residuals[i] = fit.residual(static_cast<Eigen::Index>(i));
    fitted[i] = y[i] + residuals[i];
  }
  const std::string unit =
      signal == SignalModel::absorbance ? "absorbance" : signal_kind_name(curve.kind());
  result.diagnostics.series.push_back({"fitted_signal", unit, v, fitted});
  if (layout.lag >= 0 || layout.drift >= 0)
    result.diagnostics.series.push_back({"equilibrium_signal", unit, v, fit.equilibrium});
  result.diagnostics.series.push_back({"residuals", unit, v, residuals});
  for (std::size_t k = 0; k < result.endpoints.size(); ++k) {
    result.diagnostics.markers.push_back(
        {"endpoint " + std::to_string(k + 1), MarkerAxis::volume, result.endpoints[k].volume_ml});
  }
  return result;
}

}  // namespace veq::detection
