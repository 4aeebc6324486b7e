// The data of `veq demo`, all invented: the Ferncombe water laboratory's
// Tuesday rack. A scenario for the simulator (what the vessels truly hold:
// hidden from the controller), the two methods the lab uses, and the series
// it queues.
#pragma once

namespace veq::cli::demo {

/// The simulated bench and rack. Hidden truths: the EDTA is labelled 0.0100
/// mol/L but is truly 0.00985 mol/L; every calcium vessel carries a blank of
/// 2 µmol of calcium from the ammonia buffer's salts; the nickel vessels are
/// acidified rinse water (pH 3) that the method must bring to pH 10. The
/// scenario's own sample is nickel (the back-titrated metal); the calcium
/// vessels say so in the rack. Formation constants: CaY 10.65 and NiY 18.4
/// (log K at 25 °C, 0.1 mol/L ionic strength; recalled from memory, as in
/// the shipped constants library).
inline const char* kScenario = R"json({
  "name": "Ferncombe water laboratory, Tuesday rack (invented demo)",
  "seed": 20261208,
  "sample": {"metal": "nickel", "charge": 2, "metal_conc_mol_per_l": 0.00095, "volume_ml": 50.0,
             "ph": 10.0, "log10_formation_constant": 18.4, "blank_metal_mol": 0.0},
  "titrant": {"name": "EDTA", "label_conc_mol_per_l": 0.0100, "true_conc_mol_per_l": 0.00985,
              "pka": [0.0, 1.5, 2.00, 2.69, 6.13, 10.37]},
  "second_titrant": {"name": "calcium standard", "metal": "calcium", "charge": 2,
                     "label_conc_mol_per_l": 0.0100, "true_conc_mol_per_l": 0.0100,
                     "log10_formation_constant": 10.65},
  "burette": {"model": "veq virtual burette, 20 mL", "cylinder_ml": 20.0,
              "steps_per_cylinder": 40000, "max_rate_ml_per_min": 40.0, "max_dose_ml": 20.0},
  "second_burette": {"model": "veq virtual burette, 20 mL", "cylinder_ml": 20.0,
                     "steps_per_cylinder": 40000, "max_rate_ml_per_min": 40.0,
                     "max_dose_ml": 20.0},
  "electrode": {"model": "veq virtual millivolt meter with pH input",
                "electrode": "calcium ion-selective, virtual", "metal": "calcium",
                "e0_mv": 150.0, "slope_percent": 98.0, "noise_mv": 0.05,
                "response_time_s": 1.0, "reports_ph": true},
  "auxiliary_doser": {"buffer": true,
                      "acid": {"reservoir_ml": 250.0, "strong_acid_mol_per_l": 0.5},
                      "base": {"reservoir_ml": 250.0, "strong_acid_mol_per_l": -1.0}},
  "sample_changer": {"positions": 30},
  "rack": [
    {"position": 1, "label": "conditioning", "metal": "calcium", "log10_formation_constant": 10.65,
     "metal_conc_mol_per_l": 0.002, "blank_metal_mol": 2.0e-6},
    {"position": 2, "label": "Ca 0.1 mmol/L", "metal": "calcium", "log10_formation_constant": 10.65,
     "metal_conc_mol_per_l": 0.0001},
    {"position": 3, "label": "Ca 1 mmol/L", "metal": "calcium", "log10_formation_constant": 10.65,
     "metal_conc_mol_per_l": 0.001},
    {"position": 4, "label": "Ca 10 mmol/L", "metal": "calcium", "log10_formation_constant": 10.65,
     "metal_conc_mol_per_l": 0.01},
    {"position": 5, "label": "burette check", "on_balance": true},
    {"position": 6, "label": "blank 1", "metal": "calcium", "log10_formation_constant": 10.65,
     "metal_mol": 1.0e-12, "blank_metal_mol": 2.0e-6},
    {"position": 7, "label": "blank 2", "metal": "calcium", "log10_formation_constant": 10.65,
     "metal_mol": 1.0e-12, "blank_metal_mol": 2.0e-6},
    {"position": 8, "label": "CaCO3 1", "metal": "calcium", "log10_formation_constant": 10.65,
     "mass_g": 0.01500, "purity_percent": 99.95, "blank_metal_mol": 2.0e-6},
    {"position": 9, "label": "CaCO3 2", "metal": "calcium", "log10_formation_constant": 10.65,
     "mass_g": 0.01480, "purity_percent": 99.95, "blank_metal_mol": 2.0e-6},
    {"position": 10, "label": "CaCO3 3", "metal": "calcium", "log10_formation_constant": 10.65,
     "mass_g": 0.01520, "purity_percent": 99.95, "blank_metal_mol": 2.0e-6},
    {"position": 11, "label": "Ferncombe spring", "metal": "calcium", "log10_formation_constant": 10.65,
     "metal_conc_mol_per_l": 0.00162, "blank_metal_mol": 2.0e-6},
    {"position": 12, "label": "Ferncombe spring", "metal": "calcium", "log10_formation_constant": 10.65,
     "metal_conc_mol_per_l": 0.00162, "blank_metal_mol": 2.0e-6},
    {"position": 13, "label": "Ferncombe spring", "metal": "calcium", "log10_formation_constant": 10.65,
     "metal_conc_mol_per_l": 0.00162, "blank_metal_mol": 2.0e-6},
    {"position": 14, "label": "Holloway borehole", "metal": "calcium", "log10_formation_constant": 10.65,
     "metal_conc_mol_per_l": 0.00287, "blank_metal_mol": 2.0e-6},
    {"position": 15, "label": "Holloway borehole", "metal": "calcium", "log10_formation_constant": 10.65,
     "metal_conc_mol_per_l": 0.00287, "blank_metal_mol": 2.0e-6},
    {"position": 16, "label": "Holloway borehole", "metal": "calcium", "log10_formation_constant": 10.65,
     "metal_conc_mol_per_l": 0.00287, "blank_metal_mol": 2.0e-6},
    {"position": 17, "label": "Millrace well", "metal": "calcium", "log10_formation_constant": 10.65,
     "metal_conc_mol_per_l": 0.00210, "blank_metal_mol": 2.0e-6},
    {"position": 18, "label": "Millrace well", "metal": "calcium", "log10_formation_constant": 10.65,
     "metal_conc_mol_per_l": 0.00210, "blank_metal_mol": 2.0e-6},
    {"position": 19, "label": "Millrace well", "metal": "calcium", "log10_formation_constant": 10.65,
     "metal_conc_mol_per_l": 0.00210, "blank_metal_mol": 2.0e-6},
    {"position": 20, "label": "Brassworks rinse tank 3", "metal_conc_mol_per_l": 0.00095,
     "ph": 3.0, "buffer_capacity_mol_per_ph": 2.0e-4},
    {"position": 21, "label": "Brassworks rinse tank 3", "metal_conc_mol_per_l": 0.00095,
     "ph": 3.0, "buffer_capacity_mol_per_ph": 2.0e-4},
    {"position": 22, "label": "Brassworks rinse tank 3", "metal_conc_mol_per_l": 0.00095,
     "ph": 3.0, "buffer_capacity_mol_per_ph": 2.0e-4},
    {"position": 23, "label": "check 2 mmol/L", "metal": "calcium", "log10_formation_constant": 10.65,
     "metal_conc_mol_per_l": 0.00200, "blank_metal_mol": 2.0e-6},
    {"position": 24, "label": "check 2 mmol/L", "metal": "calcium", "log10_formation_constant": 10.65,
     "metal_conc_mol_per_l": 0.00200, "blank_metal_mol": 2.0e-6}
  ]
})json";

/// Calcium in drinking water: ammonia buffer pH 10, direct titration with
/// EDTA, calcium electrode.
inline const char* kCalciumMethod = R"(# Calcium in drinking water (veq demo, invented)
[method]
name = calcium in drinking water
description = Ammonia buffer pH 10, direct titration with EDTA, calcium electrode
replicates = 2
[titrant]
name = EDTA 0.01 mol/L
burette = burette 1
[reagent]
name = ammonia buffer pH 10
doser = doser 1
[indication]
kind = electrode
name = calcium electrode 1
needs calibration = yes
[result]
analyte = calcium
# IUPAC standard atomic weight of calcium
molar mass = 40.078 g/mol
analyte per titrant = 1
unit = mmol/L
lowest = 0.5 mmol/L
highest = 5 mmol/L
largest replicate difference = 1 %
[step]
kind = add reagent
reagent = ammonia buffer pH 10
volume = 2 mL
[step]
kind = wait
duration = 30 s
stirrer speed = 400 rpm
[step]
kind = titrate
titrant = EDTA 0.01 mol/L
dosing = adaptive increments
largest volume = 20 mL
volume past endpoint = 1 mL
[step]
kind = evaluate
endpoint method = derivative
expected endpoint = 0.05 to 19 mL
[step]
kind = rinse
)";

/// Nickel in plating rinse water by back-titration: a known excess of EDTA,
/// the pH brought to 10 with ammonia, the EDTA left over titrated back with a
/// calcium standard that the calcium electrode sees.
inline const char* kNickelMethod = R"(# Nickel in rinse water by back-titration (veq demo, invented)
[method]
name = nickel in rinse water by back-titration
description = Excess EDTA, pH 10 with ammonia, back-titration with a calcium standard
replicates = 2
[titrant]
name = EDTA 0.01 mol/L
burette = burette 1
[titrant]
name = calcium standard 0.01 mol/L
burette = burette 2
[reagent]
name = nitric acid 0.5 mol/L
doser = doser 2
[reagent]
name = ammonia 1 mol/L
doser = doser 3
[indication]
kind = electrode
name = calcium electrode 1
needs calibration = yes
[result]
analyte = nickel
# IUPAC standard atomic weight of nickel
molar mass = 58.693 g/mol
analyte per titrant = 1
unit = mg/L
lowest = 5 mg/L
highest = 200 mg/L
largest replicate difference = 2 %
[step]
kind = add titrant
titrant = EDTA 0.01 mol/L
volume = 10 mL
[step]
kind = adjust ph
target = 10
tolerance = 0.2
acid = nitric acid 0.5 mol/L
base = ammonia 1 mol/L
largest total volume = 4 mL
[step]
kind = wait
duration = 60 s
stirrer speed = 400 rpm
[step]
kind = back titrate
titrant = calcium standard 0.01 mol/L
dosing = adaptive increments
largest volume = 15 mL
volume past endpoint = 1 mL
[step]
kind = evaluate
endpoint method = derivative
expected endpoint = 0.5 to 9.5 mL
[step]
kind = rinse
)";

/// The Tuesday rack as the lab queues it.
inline const char* kSeries =
    R"(# Tuesday rack of the Ferncombe water laboratory (veq demo, invented)
[series]
name = Ferncombe Tuesday rack
check standard every = 2
[conditioning]
method = calcium in drinking water
positions = 1
aliquots = 50 mL
[calibration]
electrode = calcium electrode 1
standards = 0.0001, 0.001, 0.01 mol/L
positions = 2, 3, 4
[burette check]
burette = burette 1
nominal volume = 20 mL
test volume = 10 mL
deliveries = 5
water temperature = 20 °C
positions = 5
[blank]
method = calcium in drinking water
positions = 6, 7
aliquots = 50 mL
[titer]
titrant = EDTA 0.01 mol/L
method = calcium in drinking water
standard = calcium carbonate
standard molar mass = 100.0869 g/mol
purity = 99.95 %
masses = 0.01500, 0.01480, 0.01520 g
positions = 8, 9, 10
[sample]
id = Ferncombe spring
method = calcium in drinking water
positions = 11, 12, 13
aliquots = 50 mL
[sample]
id = Holloway borehole
method = calcium in drinking water
positions = 14, 15, 16
aliquots = 50 mL
[sample]
id = Millrace well
method = calcium in drinking water
positions = 17, 18, 19
aliquots = 50 mL
[sample]
id = Brassworks rinse tank 3
method = nickel in rinse water by back-titration
positions = 20, 21, 22
aliquots = 50 mL
[check standard]
id = check 2 mmol/L
method = calcium in drinking water
positions = 23, 24
replicates = 1
aliquots = 50 mL
expected = 2 mmol/L
tolerance = 1.5 %
)";

}  // namespace veq::cli::demo
