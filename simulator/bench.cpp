#include "simulator/bench.hpp"

#include <initializer_list>

#include "chemistry/ligand.hpp"

namespace veq::simulator {

chemistry::OneToOneTitration scenario_chemistry(const Scenario& s) {
  chemistry::OneToOneTitration t;
  t.metal_conc_mol_per_l = s.sample.metal_conc_mol_per_l;
  t.sample_volume_ml = s.sample.volume_ml;
  t.titrant_conc_mol_per_l = s.titrant.true_conc_mol_per_l;
  const double alpha_ligand = chemistry::fully_deprotonated_fraction(s.titrant.pka, s.sample.ph);
  t.conditional_constant = chemistry::conditional_formation_constant(
      s.sample.log10_formation_constant, alpha_ligand, s.sample.alpha_metal);
  return t;
}

SimulatedBench::SimulatedBench(const Scenario& scenario, drivers::Clock& clock)
    : scenario_(scenario),
      // Separate, fixed streams per device so that one device's draws never
      // shift another's: the same scenario and seed give the same curve.
      burette_(scenario.burette, clock, scenario.seed * 2654435761u + 1),
      electrode_(scenario.electrode, scenario_chemistry(scenario), scenario.sample.charge,
                 scenario.sample.reaction_time_s, clock, scenario.seed * 2654435761u + 2,
                 [this] { return burette_.true_delivered_ml(); }),
      burette_line_("burette", burette_, clock),
      electrode_line_("electrode", electrode_, clock),
      doser_(scenario.auxiliary_doser, clock, scenario.seed * 2654435761u + 3),
      photometer_(
          scenario.photometer, scenario_chemistry(scenario), clock, scenario.seed * 2654435761u + 4,
          [this] { return burette_.true_delivered_ml(); },
          [this] { return doser_.true_added_ml(); }),
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
  electrode_.set_other_liquid([this] { return doser_.true_added_ml(); });
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

double SimulatedBench::true_equivalence_reading_ml() const {
  const double true_volume_ml = scenario_.sample.metal_conc_mol_per_l * scenario_.sample.volume_ml /
                                scenario_.titrant.true_conc_mol_per_l;
  return true_volume_ml / (1.0 + scenario_.burette.systematic_error_percent / 100.0);
}

}  // namespace veq::simulator
