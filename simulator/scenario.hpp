// A simulated sample and bench, read from a scenario file (JSON, described in
// docs/scenarios.md). Some values are hidden truths the controller never sees.
#pragma once

#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

#include "common/result.hpp"

namespace veq::simulator {

/// The metal in the sample and how it binds the titrant (1:1 complex).
struct SampleSpec {
  std::string metal = "calcium";
  int charge = 2;                         ///< ionic charge of the free metal
  double metal_conc_mol_per_l = 0.0;      ///< true metal content (hidden truth), mol/L
  double volume_ml = 0.0;                 ///< sample volume in the vessel, mL
  double ph = 10.0;                       ///< buffered pH of the vessel
  double log10_formation_constant = 0.0;  ///< log Kf of the metal-titrant complex
  double alpha_metal = 1.0;               ///< fraction of metal free of auxiliary ligands
  /// Time constant of the complexation itself (s): 0 for metals that react at
  /// once (calcium, zinc); tens of seconds for slow ones (nickel, aluminium),
  /// whose free metal approaches equilibrium only gradually after each dose.
  double reaction_time_s = 0.0;
  /// Hidden truth: metal already in the vessel before any titrant that the
  /// sample did not bring (a buffer or water carrying a little of the same
  /// metal: the blank), mol. It is titrated with the sample's metal. 0: a
  /// perfectly clean bench, which would let no blank determination fail.
  double blank_metal_mol = 0.0;
  /// Buffer capacity of the vessel, mol of strong acid per pH unit: acid or
  /// base dosed by the auxiliary doser moves the pH linearly,
  /// pH = ph - net strong acid mol / capacity, clamped to 0..14 (a linear
  /// approximation of a buffer, good for small moves near its pKa). 0: the
  /// pH stays fixed whatever is added (an ideal buffer, as before). With a
  /// chemistry section it moves the section's fixed "ph" the same way (the
  /// section must fix one), so that a vessel can be titrated at one pH and
  /// then at another.
  double buffer_capacity_mol_per_ph = 0.0;
};

struct TitrantSpec {
  std::string name = "EDTA";
  double label_conc_mol_per_l = 0.0;  ///< what the bottle says, mol/L (given to the controller)
  double true_conc_mol_per_l = 0.0;   ///< what it really is (hidden truth), mol/L
  std::vector<double> pka;            ///< acid constants of the titrant
};

/// A mechanical fault of a motor: from a moment of device time on, any
/// motion stops at once and the device reports it (append-only names).
enum class MotorFaultKind : int { none = 0, stalled = 1, overload = 2, empty = 3 };

struct MotorFault {
  MotorFaultKind kind = MotorFaultKind::none;
  double after_s = 0.0;  ///< seconds of device time before the fault begins
};

struct BuretteSpec {
  std::string model = "veq virtual burette";
  std::string serial_number = "virtual-burette-1";
  double cylinder_ml = 20.0;
  double steps_per_cylinder = 20000.0;  ///< resolution: cylinder_ml / steps per step
  double max_rate_ml_per_min = 40.0;
  double max_dose_ml = 5.0;               ///< largest single dose the device accepts
  double systematic_error_percent = 0.0;  ///< true delivery = commanded * (1 + e/100) (hidden)
  double random_error_ml = 0.0;           ///< standard deviation of each dose's error (hidden)
  double reservoir_ml = 1000.0;           ///< titrant left in the bottle
  /// Fastest filling rate, mL/min; 0: the same as max_rate_ml_per_min.
  double max_fill_rate_ml_per_min = 0.0;
  /// Outlet ports of the valve the host may choose (1..ports); 0: none.
  int ports = 0;
  MotorFault motor_fault;
};

/// The titrant of a second burette for a back-titration: a solution of a
/// metal that binds what is left of the first titrant (EDTA) after the
/// sample's metal has taken its share.
struct SecondTitrantSpec {
  bool present = false;
  std::string name = "zinc sulfate";
  std::string metal = "zinc";         ///< the metal it is (the electrode may sense it)
  int charge = 2;                     ///< ionic charge of the free metal
  double label_conc_mol_per_l = 0.0;  ///< on the bottle (given to the controller), mol/L
  double true_conc_mol_per_l = 0.0;   ///< what it really is (hidden truth), mol/L
  /// log Kf of its metal with the first titrant, 1:1 complex.
  double log10_formation_constant = 0.0;
  double alpha_metal = 1.0;  ///< fraction of its metal free of auxiliary ligands
};

/// A metal other than the measured one that the electrode also answers to
/// (Nikolsky-Eisenman), with its potentiometric selectivity coefficient.
struct Interferent {
  std::string metal;         ///< name in the chemistry section (constants library)
  double coefficient = 0.0;  ///< K_ij, dimensionless
};

struct ElectrodeSpec {
  std::string model = "veq virtual millivolt meter";
  std::string electrode = "calcium ion-selective (virtual)";
  double e0_mv = 150.0;          ///< standard potential of the cell, mV
  double slope_percent = 100.0;  ///< slope as % of the Nernstian value
  double temperature_c = 25.0;
  double noise_mv = 0.1;          ///< standard deviation of Gaussian noise, mV
  double response_time_s = 2.0;   ///< first-order time constant of the response, s
  double drift_mv_per_min = 0.0;  ///< steady drift of the reference electrode, mV/min
  std::string serial_number = "virtual-meter-1";
  /// Time constant of mixing, s: a dose reaches the electrode's surface
  /// gradually, as if the vessel's content near it followed the bulk with
  /// this first-order lag. 0: perfectly mixed at once.
  double mixing_time_s = 0.0;
  /// The metal the electrode senses (default: the first metal), e.g. "Cu"
  /// for indirect indication with a little Cu-EDTA (chemistry section), or
  /// the second titrant's metal for a back-titration (1:1 model).
  std::string metal;
  /// Activity the electrode cannot see below, mol/L: it reads
  /// log10(a + limit) (the detection limit of an ion-selective electrode).
  /// 0: none. A back-titration's electrode needs one, or it reads the free
  /// second metal of 0 before the first drop as a floor of 1e-30 mol/L.
  double detection_limit_mol_per_l = 0.0;
  /// The meter also reports the vessel's pH (a pH input beside the metal
  /// electrode): `ph=` in each reading, the true pH plus noise.
  bool reports_ph = false;
  double ph_noise = 0.005;  ///< standard deviation of the reported pH's noise
  /// Chemistry section only: other metals it answers to.
  std::vector<Interferent> interferents;
};

/// One reagent bottle of an auxiliary doser.
struct ReagentSpec {
  bool present = false;         ///< the doser has a pump for it
  double reservoir_ml = 500.0;  ///< left in the bottle, mL
  /// Hidden truth: the titrated metal this reagent carries, mol/L (a buffer
  /// made from salts with a trace of calcium adds a blank with every mL).
  double metal_conc_mol_per_l = 0.0;
  /// Strong acid in the reagent, mol/L (negative: strong base). It moves the
  /// vessel's pH when the scenario's chemistry section leaves pH to the
  /// proton balance (no fixed "ph"), or in the 1:1 model when the sample
  /// has a buffer_capacity_mol_per_ph (with a chemistry section too, whose
  /// fixed "ph" it then moves); otherwise the pH stays fixed.
  double strong_acid_mol_per_l = 0.0;
};

struct AuxiliaryDoserSpec {
  std::string model = "veq virtual reagent doser";
  std::string serial_number = "virtual-doser-1";
  double max_dose_ml = 5.0;               ///< largest single dose accepted, mL
  double max_rate_ml_per_min = 20.0;      ///< fastest pumping, mL/min
  double systematic_error_percent = 0.0;  ///< true volume = asked * (1 + e/100) (hidden)
  ReagentSpec buffer{true, 500.0};
  ReagentSpec masking_agent{false, 250.0};
  ReagentSpec indicator{true, 100.0};
  ReagentSpec water{true, 2000.0};
  /// Strong acid and base to adjust the pH; absent unless the scenario
  /// names them. 0.1 mol/L: hydrochloric acid and sodium hydroxide as a lab
  /// keeps them for small pH moves (common practice).
  ReagentSpec acid{false, 250.0, 0.0, 0.1};
  ReagentSpec base{false, 250.0, 0.0, -0.1};
  MotorFault motor_fault;
};

/// An absorption band: molar absorptivity falling off as a Gaussian in
/// wavelength around its peak (an invented band shape, good enough for a
/// demonstration; real spectra are asymmetric and broader in the red).
struct AbsorptionBand {
  double peak_nm = 600.0;
  double epsilon_l_per_mol_cm = 0.0;  ///< molar absorptivity at the peak, L/(mol cm)
  double width_nm = 60.0;             ///< standard deviation of the band, nm
};

struct PhotometerSpec {
  std::string model = "veq virtual photometer";
  std::string serial_number = "virtual-photometer-1";
  double min_wavelength_nm = 380.0;
  double max_wavelength_nm = 800.0;
  double wavelength_nm = 745.0;       ///< set at power-on
  double path_length_cm = 1.0;        ///< light path through the vessel (a dipping probe)
  double baseline_absorbance = 0.05;  ///< the cell and solvent, before any reference is taken
  double noise_absorbance = 0.0005;   ///< standard deviation of each reading's noise
  /// Stray light as a fraction of the lamp's light reaching the detector
  /// unabsorbed: A = -log10((T + s) / (1 + s)). 0: an ideal instrument.
  double stray_light_fraction = 0.0;
  /// Bands of the free metal, the 1:1 complex and the free titrant. Default:
  /// only the complex absorbs, a copper-EDTA-like band near 745 nm with
  /// ε about 95 L/(mol cm) (recalled from memory; invented for the demo).
  AbsorptionBand metal{800.0, 0.0, 60.0};
  AbsorptionBand complex{745.0, 95.0, 90.0};
  AbsorptionBand titrant{300.0, 0.0, 30.0};
};

struct BalanceSpec {
  std::string model = "veq virtual balance";
  std::string serial_number = "virtual-balance-1";
  double capacity_g = 220.0;
  double readability_g = 0.0001;
  double load_g = 0.0;  ///< what stands on the pan at the start, g
  /// The burette delivers onto the balance (checking a burette by weighing
  /// the water it delivers): its true delivered volume times the density
  /// adds to the load.
  bool receives_burette = false;
  /// Density of the delivered liquid, g/mL: water at 20 °C is 0.99820 g/mL
  /// (CRC Handbook of Chemistry and Physics, density of water table;
  /// recalled from memory).
  double density_g_per_ml = 0.99820;
  double noise_g = 0.00005;       ///< standard deviation of the reading's noise, g
  double settle_time_s = 1.5;     ///< first-order time constant after a load change, s
  double stable_band_g = 0.0003;  ///< reading within this of the load counts as stable, g
  /// Hidden truth: the zero error of the balance, g, added to every gross
  /// reading (a tare removes it; an untared weighing carries it).
  double offset_g = 0.0;
  /// Hidden truth: error of the balance's sensitivity, %: shown gross =
  /// load * (1 + e/100) + offset (what a check weight would reveal).
  double sensitivity_error_percent = 0.0;
};

struct StirrerSpec {
  std::string model = "veq virtual stirrer";
  std::string serial_number = "virtual-stirrer-1";
  double max_speed_rpm = 1500.0;
  double min_speed_rpm = 100.0;
  double ramp_rpm_per_s = 400.0;  ///< how fast the speed follows a new target
  /// Above this target the stir bar decouples: the speed drops to 0 and the
  /// stirrer reports "stalled". 0: never.
  double decouple_above_rpm = 0.0;
};

struct SampleChangerSpec {
  std::string model = "veq virtual sample changer";
  std::string serial_number = "virtual-changer-1";
  int positions = 12;
  double seconds_per_position = 1.0;  ///< carrying the head one position on
  double lift_time_s = 2.0;           ///< lowering or raising the head
  bool rinse = true;                  ///< has a rinse pump
  /// A position the head cannot reach (a vessel in the way): a move there
  /// stops with fault "blocked". 0: none.
  int blocked_position = 0;
};

/// The sample computed by the general equilibrium engine instead of the 1:1
/// model: a chemistry sample document (docs/chemistry.md: metals, pH or a
/// proton balance, buffer and masking ligands, indicator) with the shipped
/// constants library. The titrant's concentration is the scenario's true one.
struct ChemistrySpec {
  bool present = false;
  std::string sample_json;  ///< the section's text, for chemistry::parse_sample_json
  /// Metal the blank and reagent metal belong to (default: the first metal).
  std::string blank_metal;
  /// Titrant already in the vessel before the first dose, mol: a little
  /// Cu-EDTA added for indirect indication brings this much EDTA along with
  /// the copper listed among the metals. 0: none.
  double premixed_titrant_mol = 0.0;
};

/// What a replayed instrument does when the dosed volume leaves the stored
/// curve's range.
enum class ReplayOutside : int { clamp = 0, fault = 1 };

/// A stored curve served as the electrode or the photometer: the signal is
/// interpolated linearly at the titrant volume in the vessel.
struct ReplaySpec {
  bool present = false;
  std::string role = "electrode";  ///< "electrode" (mV) or "photometer" (absorbance)
  std::vector<double> volume_ml;   ///< strictly increasing
  std::vector<double> signal;      ///< mV or absorbance at each volume
  ReplayOutside outside = ReplayOutside::clamp;
  std::string file;  ///< CSV path, read by load_scenario (relative to the scenario file)
};

/// Faults a virtual device can be told to show (append-only names).
/// On the line: silence, garbage, partial_line, slow_replies, disconnect.
/// In the sensor (electrode, photometer; never_stable: balance): dead,
/// spikes, out_of_range, never_stable.
enum class FaultKind : int {
  none = 0,
  silence = 1,       ///< the device answers nothing
  garbage = 2,       ///< line noise in place of each message
  partial_line = 3,  ///< the first half of each message, no line end
  slow_replies = 4,  ///< each message arrives delay_ms late
  disconnect = 5,    ///< the cable is pulled: the line closes at the next request
  dead = 6,          ///< the sensor's reading freezes at its value when the fault began
  spikes = 7,        ///< now and then a reading is off by +-size
  out_of_range = 8,  ///< the meter refuses every reading with over_limit
  never_stable = 9,  ///< the balance's reading wanders by +-size and never settles
};

/// A fault that starts at a moment of virtual time and lasts until another
/// (from then on, unless until_s is set).
struct FaultPlan {
  FaultKind kind = FaultKind::none;
  double after_s = 0.0;  ///< seconds of device time before the fault begins
  /// Seconds of device time at which the fault ends; infinity: never.
  double until_s = 1e300;
  /// slow_replies: how late each message arrives, ms. 3000 is longer than
  /// the drivers' 2 s reply timeout, so that a host must notice it.
  double delay_ms = 3000.0;
  /// spikes: chance that one reading is hit, 0..1. 0.2: often enough to show
  /// in a 30-point curve.
  double probability = 0.2;
  /// spikes and never_stable: size of the error in the reading's own unit
  /// (mV, absorbance, g); 0 picks 50 mV, 0.5 absorbance or 0.05 g.
  double size = 0.0;
};

/// A primary standard weighed into a rack vessel: its metal is
/// mass * purity / 100 / molar mass.
struct StandardSpec {
  bool present = false;
  double mass_g = 0.0;
  double purity_percent = 100.0;
  /// Calcium carbonate, 100.0869 g/mol (from the IUPAC 2013 standard atomic
  /// weights; recalled from memory): the usual standard for EDTA.
  double molar_mass_g_per_mol = 100.0869;
  /// Metal the standard brings, mol.
  double metal_mol() const { return mass_g * purity_percent / 100.0 / molar_mass_g_per_mol; }
};

/// A vessel of the rack of a sample changer: what it truly holds (hidden
/// truths; the controller knows only the position and what the lab wrote).
struct RackPosition {
  int position = 0;   ///< 1..sample_changer.positions
  std::string label;  ///< what the lab wrote on the vessel
  /// The scenario's sample with this position's fields in place of its own.
  SampleSpec sample;
  /// A primary standard instead of a sample: its metal (in sample.volume_ml).
  StandardSpec standard;
  /// Its own chemistry section (present), else the scenario's.
  ChemistrySpec chemistry;
  /// The vessel stands on the balance and the burette delivers onto it (a
  /// gravimetric burette check); it holds water only.
  bool on_balance = false;
};

struct Scenario {
  std::string name;
  std::uint64_t seed = 1;
  SampleSpec sample;
  TitrantSpec titrant;
  BuretteSpec burette;
  ElectrodeSpec electrode;
  FaultPlan burette_fault;
  FaultPlan electrode_fault;
  AuxiliaryDoserSpec auxiliary_doser;
  PhotometerSpec photometer;
  BalanceSpec balance;
  StirrerSpec stirrer;
  SampleChangerSpec sample_changer;
  FaultPlan auxiliary_doser_fault;
  FaultPlan photometer_fault;
  FaultPlan balance_fault;
  FaultPlan stirrer_fault;
  FaultPlan sample_changer_fault;
  /// The general chemistry (see ChemistrySpec); unset: the 1:1 model above.
  ChemistrySpec chemistry;
  ReplaySpec replay;
  /// A second burette for back-titrations (unused without second_titrant).
  /// Its serial number defaults to virtual-burette-2 when read from a file.
  BuretteSpec second_burette;
  FaultPlan second_burette_fault;
  SecondTitrantSpec second_titrant;
  /// The vessels of the sample changer's rack (empty: one vessel, the
  /// sample above, whatever the changer does).
  std::vector<RackPosition> rack;
};

/// The rack position's entry, or nullptr if the rack holds nothing there.
const RackPosition* rack_position(const Scenario& scenario, int position);
/// The scenario as seen by the vessel at a rack position: the position's
/// sample, standard or chemistry in place of the scenario's own (a
/// position not in the rack: the scenario itself).
Scenario vessel_scenario(const Scenario& scenario, int position);
/// Water only: the metal the vessel of an on_balance position holds, mol/L
/// (a trace, so that the electrode still reads a finite potential).
inline constexpr double kWaterTraceMetalMolPerL = 1e-9;

/// Parses a scenario document. Errors name the field (and line for syntax).
Result<Scenario> parse_scenario(std::string_view json_text, std::string_view source_name);
/// Reads and parses a scenario file.
Result<Scenario> load_scenario(const std::string& path);

/// A replay curve from CSV text: two columns, volume (mL) then signal, an
/// optional header line, commas or semicolons. Errors name the line.
Result<ReplaySpec> parse_replay_csv(std::string_view text, std::string_view source_name);
/// A replay curve from a stored run's columns (plain vectors, e.g. read from
/// the store by the caller). Errors name the row.
Result<ReplaySpec> replay_from_columns(const std::vector<double>& volume_ml,
                                       const std::vector<double>& signal);
/// The stored signal at a volume (mL), linear between stored points. Outside
/// the stored range it is the nearest end's value and *outside is set.
double replay_signal(const ReplaySpec& replay, double volume_ml, bool* outside);

FaultKind fault_kind_from_name(std::string_view name, bool* ok);
const char* fault_kind_name(FaultKind kind);
MotorFaultKind motor_fault_kind_from_name(std::string_view name, bool* ok);
/// "none", "stalled", "overload", "empty"
const char* motor_fault_kind_name(MotorFaultKind kind);

}  // namespace veq::simulator
