#include "simulator/bench.hpp"

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
      electrode_line_("electrode", electrode_, clock) {
  burette_.share_lock(&vessel_lock_);
  electrode_.share_lock(&vessel_lock_);
  burette_.set_fault(scenario.burette_fault);
  electrode_.set_fault(scenario.electrode_fault);
}

void SimulatedBench::disconnect() {
  burette_line_.close();
  electrode_line_.close();
}

double SimulatedBench::true_equivalence_reading_ml() const {
  const double true_volume_ml = scenario_.sample.metal_conc_mol_per_l * scenario_.sample.volume_ml /
                                scenario_.titrant.true_conc_mol_per_l;
  return true_volume_ml / (1.0 + scenario_.burette.systematic_error_percent / 100.0);
}

}  // namespace veq::simulator
