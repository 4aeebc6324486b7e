#include "simulator/bench.hpp"

#include <algorithm>
#include <initializer_list>
#include <stdexcept>
#include <utility>

#include "drivers/auxiliary_doser_client.hpp"

namespace veq::simulator {

namespace {

VesselModel vessel_or_throw(const Scenario& s) {
  auto v = VesselModel::create(s);
  if (!v)
    throw std::invalid_argument(v.error().message);  // parse_scenario checks this
  return std::move(*v);
}

/// The balance takes whatever on_balance_ml() says lies on its pan from the
/// burette (nothing unless the scenario or a rack vessel puts it there).
BalanceSpec balance_spec(const Scenario& s) {
  BalanceSpec b = s.balance;
  b.receives_burette = true;
  return b;
}

constexpr std::array<drivers::Reagent, 6> kReagents = {
    drivers::Reagent::buffer, drivers::Reagent::masking_agent, drivers::Reagent::indicator,
    drivers::Reagent::water,  drivers::Reagent::acid,          drivers::Reagent::base};

}  // namespace

SimulatedBench::SimulatedBench(const Scenario& scenario, drivers::Clock& clock)
    : scenario_(scenario),
      vessel_(scenario),
      truth_vessel_(vessel_or_throw(scenario)),
      // Separate, fixed streams per device so that one device's draws never
      // shift another's: the same scenario and seed give the same curve.
      burette_(scenario.burette, clock, scenario.seed * 2654435761u + 1),
      second_burette_(scenario.second_burette, clock, scenario.seed * 2654435761u + 8),
      electrode_(scenario.electrode, vessel_or_throw(scenario), scenario.sample.reaction_time_s,
                 clock, scenario.seed * 2654435761u + 2, [this] { return titrant_in_vessel_ml(); }),
      burette_line_("burette", burette_, clock),
      electrode_line_("electrode", electrode_, clock),
      doser_(scenario.auxiliary_doser, clock, scenario.seed * 2654435761u + 3),
      photometer_(
          scenario.photometer, scenario, clock, scenario.seed * 2654435761u + 4,
          [this] { return titrant_in_vessel_ml(); }, [this] { return additions(); }),
      balance_(balance_spec(scenario), clock, scenario.seed * 2654435761u + 5,
               [this] { return on_balance_ml(); }),
      stirrer_(scenario.stirrer, clock, scenario.seed * 2654435761u + 6),
      changer_(scenario.sample_changer, clock, scenario.seed * 2654435761u + 7),
      doser_line_("auxiliary_doser", doser_, clock),
      photometer_line_("photometer", photometer_, clock),
      balance_line_("balance", balance_, clock),
      stirrer_line_("stirrer", stirrer_, clock),
      changer_line_("sample_changer", changer_, clock),
      second_burette_line_("second_burette", second_burette_, clock) {
  // Every device of the vessel answers one request at a time: the electrode
  // and photometer read what the burette and doser have put in.
  for (VirtualDevice* d :
       std::initializer_list<VirtualDevice*>{&burette_, &electrode_, &doser_, &photometer_,
                                             &balance_, &stirrer_, &changer_, &second_burette_}) {
    d->share_lock(&vessel_lock_);
    // The head may have come down since any device last answered.
    if (!scenario.rack.empty())
      d->before_each([this] { follow_changer(); });
  }
  electrode_.set_additions([this] { return additions(); });
  if (scenario.replay.present) {
    if (scenario.replay.role == "photometer") {
      photometer_.set_replay(scenario.replay);
    } else {
      electrode_.set_replay(scenario.replay);
    }
  }
  // A disconnect fault pulls the device's own cable.
  const std::pair<VirtualDevice*, drivers::MemoryTransport*> cables[] = {
      {&burette_, &burette_line_}, {&electrode_, &electrode_line_},
      {&doser_, &doser_line_},     {&photometer_, &photometer_line_},
      {&balance_, &balance_line_}, {&stirrer_, &stirrer_line_},
      {&changer_, &changer_line_}, {&second_burette_, &second_burette_line_}};
  for (const auto& [device, line] : cables)
    device->on_disconnect([line = line] { line->close(); });
  burette_.set_fault(scenario.burette_fault);
  electrode_.set_fault(scenario.electrode_fault);
  doser_.set_fault(scenario.auxiliary_doser_fault);
  photometer_.set_fault(scenario.photometer_fault);
  balance_.set_fault(scenario.balance_fault);
  stirrer_.set_fault(scenario.stirrer_fault);
  changer_.set_fault(scenario.sample_changer_fault);
  second_burette_.set_fault(scenario.second_burette_fault);
}

void SimulatedBench::disconnect() {
  for (drivers::MemoryTransport* line :
       {&burette_line_, &electrode_line_, &doser_line_, &photometer_line_, &balance_line_,
        &stirrer_line_, &changer_line_, &second_burette_line_})
    line->close();
}

VirtualDevice* SimulatedBench::device(std::string_view role) {
  if (role == "burette")
    return &burette_;
  if (role == "electrode")
    return &electrode_;
  if (role == "auxiliary_doser")
    return &doser_;
  if (role == "photometer")
    return &photometer_;
  if (role == "balance")
    return &balance_;
  if (role == "stirrer")
    return &stirrer_;
  if (role == "sample_changer")
    return &changer_;
  if (role == "second_burette")
    return &second_burette_;
  return nullptr;
}

bool SimulatedBench::set_fault(std::string_view role, FaultPlan plan) {
  VirtualDevice* d = device(role);
  if (!d)
    return false;
  std::lock_guard<std::mutex> lock(vessel_lock_);
  d->set_fault(plan);
  return true;
}

bool SimulatedBench::add_fault(std::string_view role, FaultPlan plan) {
  VirtualDevice* d = device(role);
  if (!d)
    return false;
  std::lock_guard<std::mutex> lock(vessel_lock_);
  d->add_fault(plan);
  return true;
}

double SimulatedBench::titrant_in_vessel_ml() const {
  return burette_.true_delivered_ml() - burette_zero_ml_;
}

double SimulatedBench::second_titrant_in_vessel_ml() const {
  if (!scenario_.second_titrant.present)
    return 0.0;
  return second_burette_.true_delivered_ml() - second_burette_zero_ml_;
}

int SimulatedBench::position() const {
  follow_changer();
  return position_;
}

void SimulatedBench::follow_changer() const {
  if (scenario_.rack.empty())
    return;
  changer_.refresh();
  if (changer_.lowerings() == lowerings_seen_)
    return;
  lowerings_seen_ = changer_.lowerings();
  take_vessel(changer_.position());
}

void SimulatedBench::take_vessel(int position) const {
  // What the burette delivered onto an on_balance vessel stays on the pan.
  if (on_balance_)
    balance_kept_ml_ += titrant_in_vessel_ml();
  position_ = position;
  vessel_ = vessel_scenario(scenario_, position);
  const RackPosition* p = rack_position(scenario_, position);
  on_balance_ = p && p->on_balance;
  // Titrant and reagents count from now: their totals so far are the new
  // vessel's zero.
  burette_zero_ml_ = burette_.true_delivered_ml();
  second_burette_zero_ml_ = second_burette_.true_delivered_ml();
  for (std::size_t i = 0; i < kReagents.size(); ++i)
    doser_zero_ml_[i] = doser_.true_added_ml(kReagents[i]);
  truth_vessel_ = vessel_or_throw(vessel_);
  electrode_.set_vessel(vessel_or_throw(vessel_), vessel_.sample.reaction_time_s);
  photometer_.set_vessel(vessel_);
}

double SimulatedBench::on_balance_ml() const {
  // Before any vessel is lowered the scenario's own balance setting holds.
  const bool receives = position_ == 0 ? scenario_.balance.receives_burette : on_balance_;
  return balance_kept_ml_ + (receives ? titrant_in_vessel_ml() : 0.0);
}

VesselContent SimulatedBench::additions() const {
  VesselContent c;
  c.extra_metal_mol = vessel_.sample.blank_metal_mol;
  c.second_titrant_ml = second_titrant_in_vessel_ml();
  const auto& d = scenario_.auxiliary_doser;
  const std::array<const ReagentSpec*, 6> bottles = {&d.buffer, &d.masking_agent, &d.indicator,
                                                     &d.water,  &d.acid,          &d.base};
  for (std::size_t i = 0; i < kReagents.size(); ++i) {
    const double ml = doser_.true_added_ml(kReagents[i]) - doser_zero_ml_[i];
    c.other_ml += ml;
    const ReagentSpec* spec = bottles[i];
    if (spec->metal_conc_mol_per_l == 0.0 && spec->strong_acid_mol_per_l == 0.0)
      continue;
    const double litres = ml / 1000.0;
    c.extra_metal_mol += litres * spec->metal_conc_mol_per_l;
    c.strong_acid_mol += litres * spec->strong_acid_mol_per_l;
  }
  return c;
}

namespace {

/// Each metal a vessel's scenario holds (name, mol): the chemistry
/// section's metals as written (the model may be diluted by reagents), or
/// the 1:1 sample's one metal.
std::vector<std::pair<std::string, double>> vessel_metals_mol(const Scenario& s) {
  std::vector<std::pair<std::string, double>> metals;
  if (s.chemistry.present) {
    auto composition = scenario_composition(s);
    if (composition) {
      for (const auto& m : composition->metals)
        metals.emplace_back(m.name, m.conc_mol_per_l * composition->sample_volume_ml / 1000.0);
    }
  } else {
    metals.emplace_back(s.sample.metal,
                        s.sample.metal_conc_mol_per_l * s.sample.volume_ml / 1000.0);
  }
  return metals;
}

/// Burette reading (mL) per mol of titrant truly delivered.
double reading_ml_per_mol(double true_conc_mol_per_l, const BuretteSpec& burette) {
  return 1000.0 / true_conc_mol_per_l / (1.0 + burette.systematic_error_percent / 100.0);
}

}  // namespace

BenchTruths SimulatedBench::truths() const {
  follow_changer();
  BenchTruths t;
  const Scenario& s = vessel_;
  t.position = position_;
  t.titrant_label_conc_mol_per_l = s.titrant.label_conc_mol_per_l;
  t.titrant_true_conc_mol_per_l = s.titrant.true_conc_mol_per_l;
  if (!on_balance_)
    t.sample_metals_mol = vessel_metals_mol(s);
  double sample_mol = 0.0;
  for (const auto& m : t.sample_metals_mol)
    sample_mol += m.second;
  const VesselContent added = additions();
  t.blank_metal_mol = added.extra_metal_mol;
  t.premixed_titrant_mol = s.chemistry.present ? s.chemistry.premixed_titrant_mol : 0.0;
  t.titrant_delivered_ml = titrant_in_vessel_ml();
  t.burette_systematic_error_percent = s.burette.systematic_error_percent;
  t.burette_random_error_ml = s.burette.random_error_ml;
  t.balance_offset_g = s.balance.offset_g;
  t.balance_sensitivity_error_percent = s.balance.sensitivity_error_percent;
  t.vessel_ph = s.sample.ph;
  if (!s.chemistry.present && s.sample.buffer_capacity_mol_per_ph > 0.0) {
    // The 1:1 vessel's pH moved by acid or base through its buffer capacity.
    VesselContent c = added;
    c.titrant_ml = t.titrant_delivered_ml;
    if (truth_vessel_.solve(c))
      t.vessel_ph = truth_vessel_.ph();
  }
  if (s.chemistry.present) {
    VesselContent c = added;
    c.titrant_ml = t.titrant_delivered_ml;
    const bool solved = static_cast<bool>(truth_vessel_.solve(c));
    if (solved)
      t.vessel_ph = truth_vessel_.ph();
    if (solved && truth_vessel_.model() && truth_vessel_.model()->indicator_component() >= 0) {
      const auto* model = truth_vessel_.model();
      const double fraction = model->indicator_bound_fraction(truth_vessel_.speciation());
      // The model's sample volume holds every amount (see VesselModel).
      const double indicator_mol =
          model->sample().indicator->conc_mol_per_l * model->sample().sample_volume_ml / 1000.0;
      t.indicator_bound_metal_mol = fraction * indicator_mol;
    }
  }
  const double per_reading_ml = reading_ml_per_mol(s.titrant.true_conc_mol_per_l, s.burette);
  t.sample_equivalence_reading_ml = sample_mol * per_reading_ml;
  t.vessel_equivalence_reading_ml =
      (sample_mol + t.blank_metal_mol - t.premixed_titrant_mol) * per_reading_ml;
  if (s.second_titrant.present) {
    t.second_titrant_delivered_ml = added.second_titrant_ml;
    const double free_mol = t.titrant_delivered_ml / 1000.0 * s.titrant.true_conc_mol_per_l -
                            (sample_mol + t.blank_metal_mol);
    t.second_equivalence_reading_ml =
        std::max(0.0, free_mol) *
        reading_ml_per_mol(s.second_titrant.true_conc_mol_per_l, s.second_burette);
  }
  return t;
}

PositionTruths SimulatedBench::position_truths(int position) const {
  PositionTruths t;
  t.position = position;
  const RackPosition* p = rack_position(scenario_, position);
  t.in_rack = p != nullptr;
  if (p) {
    t.label = p->label;
    t.standard = p->standard.present;
    t.on_balance = p->on_balance;
  }
  const Scenario v = vessel_scenario(scenario_, position);
  if (p && p->standard.present) {
    t.metals_mol.emplace_back(v.sample.metal, p->standard.metal_mol());
  } else if (!t.on_balance) {
    t.metals_mol = vessel_metals_mol(v);
  }
  t.blank_metal_mol = v.sample.blank_metal_mol;
  double mol = 0.0;
  for (const auto& m : t.metals_mol)
    mol += m.second;
  t.equivalence_reading_ml = mol * reading_ml_per_mol(v.titrant.true_conc_mol_per_l, v.burette);
  return t;
}

double SimulatedBench::true_equivalence_reading_ml() const {
  return truths().vessel_equivalence_reading_ml;
}

}  // namespace veq::simulator
