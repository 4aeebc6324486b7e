#include "simulator/bench.hpp"

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

}  // namespace

SimulatedBench::SimulatedBench(const Scenario& scenario, drivers::Clock& clock)
    : scenario_(scenario),
      truth_vessel_(vessel_or_throw(scenario)),
      // Separate, fixed streams per device so that one device's draws never
      // shift another's: the same scenario and seed give the same curve.
      burette_(scenario.burette, clock, scenario.seed * 2654435761u + 1),
      electrode_(scenario.electrode, vessel_or_throw(scenario), scenario.sample.reaction_time_s,
                 clock, scenario.seed * 2654435761u + 2,
                 [this] { return burette_.true_delivered_ml(); }),
      burette_line_("burette", burette_, clock),
      electrode_line_("electrode", electrode_, clock),
      doser_(scenario.auxiliary_doser, clock, scenario.seed * 2654435761u + 3),
      photometer_(
          scenario.photometer, scenario, clock, scenario.seed * 2654435761u + 4,
          [this] { return burette_.true_delivered_ml(); }, [this] { return additions(); }),
      balance_(scenario.balance, clock, scenario.seed * 2654435761u + 5,
               [this] { return burette_.true_delivered_ml(); }),
      stirrer_(scenario.stirrer, clock, scenario.seed * 2654435761u + 6),
      changer_(scenario.sample_changer, clock, scenario.seed * 2654435761u + 7),
      doser_line_("auxiliary_doser", doser_, clock),
      photometer_line_("photometer", photometer_, clock),
      balance_line_("balance", balance_, clock),
      stirrer_line_("stirrer", stirrer_, clock),
      changer_line_("sample_changer", changer_, clock) {
  // Every device of the vessel answers one request at a time: the electrode
  // and photometer read what the burette and doser have put in.
  for (VirtualDevice* d : std::initializer_list<VirtualDevice*>{
           &burette_, &electrode_, &doser_, &photometer_, &balance_, &stirrer_, &changer_})
    d->share_lock(&vessel_lock_);
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
      {&changer_, &changer_line_}};
  for (const auto& [device, line] : cables)
    device->on_disconnect([line = line] { line->close(); });
  burette_.set_fault(scenario.burette_fault);
  electrode_.set_fault(scenario.electrode_fault);
  doser_.set_fault(scenario.auxiliary_doser_fault);
  photometer_.set_fault(scenario.photometer_fault);
  balance_.set_fault(scenario.balance_fault);
  stirrer_.set_fault(scenario.stirrer_fault);
  changer_.set_fault(scenario.sample_changer_fault);
}

void SimulatedBench::disconnect() {
  for (drivers::MemoryTransport* line :
       {&burette_line_, &electrode_line_, &doser_line_, &photometer_line_, &balance_line_,
        &stirrer_line_, &changer_line_})
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

VesselContent SimulatedBench::additions() const {
  VesselContent c;
  c.other_ml = doser_.true_added_ml();
  c.extra_metal_mol = scenario_.sample.blank_metal_mol;
  const auto& d = scenario_.auxiliary_doser;
  const std::pair<drivers::Reagent, const ReagentSpec*> bottles[] = {
      {drivers::Reagent::buffer, &d.buffer},
      {drivers::Reagent::masking_agent, &d.masking_agent},
      {drivers::Reagent::indicator, &d.indicator},
      {drivers::Reagent::water, &d.water}};
  for (const auto& [reagent, spec] : bottles) {
    if (spec->metal_conc_mol_per_l == 0.0 && spec->strong_acid_mol_per_l == 0.0)
      continue;
    const double litres = doser_.true_added_ml(reagent) / 1000.0;
    c.extra_metal_mol += litres * spec->metal_conc_mol_per_l;
    c.strong_acid_mol += litres * spec->strong_acid_mol_per_l;
  }
  return c;
}

BenchTruths SimulatedBench::truths() const {
  BenchTruths t;
  const Scenario& s = scenario_;
  t.titrant_label_conc_mol_per_l = s.titrant.label_conc_mol_per_l;
  t.titrant_true_conc_mol_per_l = s.titrant.true_conc_mol_per_l;
  double sample_mol = 0.0;
  if (s.chemistry.present) {
    // The section's metals as written (the model may be diluted by reagents).
    auto composition = scenario_composition(s);
    if (composition) {
      for (const auto& m : composition->metals) {
        const double mol = m.conc_mol_per_l * composition->sample_volume_ml / 1000.0;
        t.sample_metals_mol.emplace_back(m.name, mol);
        sample_mol += mol;
      }
    }
  } else {
    sample_mol = s.sample.metal_conc_mol_per_l * s.sample.volume_ml / 1000.0;
    t.sample_metals_mol.emplace_back(s.sample.metal, sample_mol);
  }
  const VesselContent added = additions();
  t.blank_metal_mol = added.extra_metal_mol;
  t.premixed_titrant_mol = s.chemistry.present ? s.chemistry.premixed_titrant_mol : 0.0;
  t.titrant_delivered_ml = burette_.true_delivered_ml();
  t.burette_systematic_error_percent = s.burette.systematic_error_percent;
  t.burette_random_error_ml = s.burette.random_error_ml;
  t.balance_offset_g = s.balance.offset_g;
  t.balance_sensitivity_error_percent = s.balance.sensitivity_error_percent;
  t.vessel_ph = s.sample.ph;
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
  const double per_reading_ml =
      1000.0 / s.titrant.true_conc_mol_per_l / (1.0 + s.burette.systematic_error_percent / 100.0);
  t.sample_equivalence_reading_ml = sample_mol * per_reading_ml;
  t.vessel_equivalence_reading_ml =
      (sample_mol + t.blank_metal_mol - t.premixed_titrant_mol) * per_reading_ml;
  return t;
}

double SimulatedBench::true_equivalence_reading_ml() const {
  return truths().vessel_equivalence_reading_ml;
}

}  // namespace veq::simulator
