#pragma once
//! The resolved case: every value in SI units, every default filled in.
#include <map>
#include <memory>
#include <optional>
#include <stdexcept>
#include <string>
#include <utility>
#include <vector>

#include "models/environment_spec.hpp"
#include "models/tissues.hpp"

namespace thermorph {

//! Bad input: the message names file, line, column, key path, value and what is allowed. Exit code 2.
class CaseError : public std::runtime_error {
 public:
  using std::runtime_error::runtime_error;
};

//! A command-line value of an [environment] key that the timeline would override from t = 0 (never takes
//! effect). Sweeps refuse the whole sweep for it (exit 2) instead of failing every run.
class TimelineOverrideError : public CaseError {
 public:
  using CaseError::CaseError;
};

enum class Shape { Sphere, Cylinder, Cone, Plate };
enum class InitialCondition { Temperature, Steady };
//! run.axial_grading: how the automatic grid spaces an appendage's axial cells (models/grid.cpp resolveGrid).
enum class AxialGradingRule { Uniform, Graded };

const char* shapeName(Shape shape);

//! One concentric tissue layer, inside out.
struct LayerSpec {
  std::string tissue;
  double thickness = 0.0;  //!< radial thickness [m]; a cylinder's or sphere's first layer: its radius
  int cells = 1;           //!< radial cells in this layer
  bool cellsAuto = false;  //!< `cells` not given: chosen by resolveGrid (models/grid.hpp)
  //! Radial cells graded geometrically towards the layer's outer face: the ratio Q of the mapping's cell thickness
  //! at the inner face to that at the outer face (1: uniform), as axial_grading along a segment.
  double grading = 1.0;
  bool gradingAuto = true;  //!< `grading` not given: chosen with `cells` when both are left out
  //! Offsets of the cell faces from the layer's inner face, cells + 1 values from 0 to `thickness`.
  std::vector<double> cellEdges(double thickness) const;
  //! The thickest (innermost) and thinnest (outermost) cell of the layer at `thickness`.
  double largestCell(double thickness) const;
  double outermostCell(double thickness) const;
};

//! Optional fur or feather coat outside the outermost tissue layer.
struct CoatSpec {
  std::string material;
  double thickness = 0.0;  //!< [m]
  int cells = 1;
  bool cellsAuto = false;  //!< `cells` not given: chosen by resolveGrid (models/grid.hpp)
};

//! Large vessels of a segment.
struct VesselSpec {
  double countercurrentConductance = 0.0;  //!< artery to deep vein, whole segment [W/K]
  double shuntFlowMax = 0.0;               //!< largest arteriovenous shunt flow [m3/s]
  double bloodFraction = 0.03;             //!< large-vessel blood volume per tissue volume [1]
  double superficialConductance = 0.001;   //!< superficial veins to skin, whole segment [W/K]
};

//! Vasomotor state of a segment (static here; events and controllers change it).
struct VasomotorState {
  double skinPerfusion = 1.0;      //!< multiplier on skin perfusion [1]
  double shunt = 0.0;              //!< open fraction of the shunts [1]
  double superficialReturn = 0.0;  //!< share of tissue venous return taking superficial veins [1]
};

//! One body segment: geometry, layers, coat and surface.
struct SegmentSpec {
  std::string name;
  std::string parent;           //!< empty for the root
  int count = 1;                //!< identical copies simulated once
  double attachPosition = 0.5;  //!< along the parent's length [1]
  std::string attachTissue = "muscle";
  VesselSpec vessels;
  VasomotorState vasomotor;
  Shape shape = Shape::Cylinder;
  double length = 0.0;          //!< [m] (cylinder, cone, plate)
  double radiusProximal = 0.0;  //!< outer tissue radius at the proximal end [m] (cone; cylinder and sphere: radius)
  double radiusDistal = 0.0;    //!< outer tissue radius at the distal end [m] (cone)
  double width = 0.0;           //!< [m] (plate)
  int axialCells = 1;
  bool axialAuto = false;       //!< `axial_cells` not given: chosen by resolveGrid (models/grid.hpp)
  //! Geometric grading of the axial cells towards the proximal end (the junction): the ratio Q of the local cell
  //! length at the distal end to that at the proximal end of the mapping z(x) = L (Q^x - 1) / (Q - 1), x in
  //! [0, 1], whose cell edges are z(i / nz). 1: uniform. Neighbouring cells differ by Q^(1/nz), the longest is
  //! Q^((nz-1)/nz) times the shortest; refining (nz -> N nz) keeps Q, so every cell splits into N cells of ratio
  //! Q^(1/(N nz)) and refinement studies refine the same mapping.
  double axialGrading = 1.0;
  bool gradingAuto = false;     //!< `axial_grading` not given: chosen by resolveGrid (models/grid.hpp)
  std::vector<LayerSpec> layers;
  std::optional<CoatSpec> coat;
  SurfaceSpec surface;
  std::optional<double> contactRadius;  //!< sphere child: radius of the contact patch on the parent [m]

  //! Outer tissue radius or half-thickness (coat excluded) [m].
  double tissueRadius() const;
  //! The nz + 1 axial cell edges from the proximal end [m] (axial_cells, axial_grading; a sphere: {0, 1}).
  //! Uniform: i (L / nz), so a uniform segment's cells have exactly the length L / nz (axialLengths).
  std::vector<double> axialEdges() const;
  //! The nz axial cell lengths [m]: L / nz each when uniform, else the differences of axialEdges().
  std::vector<double> axialLengths() const;
};

//! A child's footprint on its parent: the area cut from the parent's lateral surface per copy of the child [m2] (a
//! sphere child's contact patch pi a^2, a = contact_radius or the smaller tissue radius, which the sphere's own
//! surface loses too; a plate's cross-section 2 w (h + coat); a cylinder's or cone's outer disc pi (r + coat)^2).
//! Body cuts it from the parent's lateral cells (models/body.cpp), checkFootprints and checkTucking read it.
double footprintSection(const SegmentSpec& child, const SegmentSpec& parent);
//! Outer lateral area of one copy of a segment, coat included [m2]: a sphere 4 pi R^2, a plate 2 w L, a cylinder
//! 2 pi R L, a cone's frustum pi (R0 + R1) sqrt(L^2 + (R1 - R0)^2) with R the outer radius (tissue plus coat).
double outerLateralArea(const SegmentSpec& s);

//! The nz + 1 edges [m] of nz axial cells over a length, uniform (grading <= 1) or geometrically graded towards
//! the proximal end with largest/smallest cell ratio `grading` (SegmentSpec::axialEdges of a cylinder, cone or plate).
std::vector<double> axialCellEdges(double length, int axialCells, double grading);

struct RunSpec {
  double duration = 3600.0;        //!< [s]
  double outputInterval = 60.0;    //!< [s]
  InitialCondition initial = InitialCondition::Temperature;
  double initialTemperature = 310.15;  //!< [K]
  double rtol = 1e-6;              //!< relative tolerance [1]
  double atol = 1e-6;              //!< absolute tolerance on temperatures [K]
  double maxStep = 0.0;            //!< maximum step [s] (0: no limit)
  int gridRefinement = 1;          //!< every cell count multiplied by this after the grid is resolved [1]
  //! The refinement the counts carry (not a key): resolveGrid sets it to run.grid_refinement when it multiplies the
  //! counts (gridRefinement is then 1), refinedCase multiplies it. The unrefined grid of a run is its counts divided
  //! by this (drivers/simulation.cpp finds a refined run's steady start from that grid's steady state).
  int appliedRefinement = 1;
  //! Tolerance of the automatic grid against a grid refined 4x [1]: segments' heat flows are estimated within
  //! half of it of their converged value (models/grid.hpp gridTargetError); controller outputs are checked after
  //! the run (drivers/record_control_grid.hpp).
  double gridTolerance = 0.01;
  //! run.axial_grading: Graded gives each appendage whose axial cells and grading are both left out the cheapest of
  //! uniform cells and cells graded towards its junction (Q = 10, 30, 100, 300, 1000) that meets the estimate;
  //! Uniform (the default) keeps uniform cells but where a water line or a Biot corner asks for grading.
  AxialGradingRule axialGrading = AxialGradingRule::Uniform;
};

struct CirculationSpec {
  double bloodDensity = 1050.0;       //!< [kg/m3]
  double bloodSpecificHeat = 3617.0;  //!< [J/(kg K)]
  std::optional<double> fixedArterialTemperature;  //!< pins the arterial supply [K]
  std::vector<std::string> bradycardiaTissues;     //!< empty: every tissue except brain
};

enum class BasalRate { Tissues, Kleiber, Power };

struct BodySpec {
  std::optional<double> mass;           //!< [kg]; default: tissue mass
  std::optional<double> bloodVolume;    //!< [m3]; default 7 % of mass
  std::optional<double> cardiacOutput;  //!< [m3/s]; default Stahl (1967)
  BasalRate basal = BasalRate::Tissues;
  double basalPower = 0.0;              //!< [W] when basal == Power
  double activity = 1.0;                //!< metabolic multiplier [1]
  double q10Reference = 310.15;         //!< reference temperature of tissue Q10 [K]
  std::string coreSegment;              //!< default: root
  std::string respiratorySegment;       //!< empty: no respiratory heat loss
  double exhaledTemperature = 308.15;   //!< [K]
};

//! Core: innermost layer of the core segment; MeanSkin: area-weighted outermost tissue layer of the whole body;
//! LocalSkin (local controllers only): the outermost tissue layer of each controlled segment, its own signal.
enum class ControlSignal { Core, MeanSkin, LocalSkin };

//! One feedback controller ([control.NAME]); present only when the table is given.
struct ControllerSpec {
  bool present = false;
  ControlSignal signal = ControlSignal::Core;
  double setPoint = 310.15;     //!< [K]
  double gain = 1.0;            //!< [1/K]
  double lower = 0.0, upper = 1.0;
  double shuntGain = 1.0;       //!< vasomotor only [1/K]
  double maxPower = 0.0;        //!< shivering only [W] (0: 3 x basal)
  double timeConstant = 120.0;  //!< [s]
  bool enabled = true;
};

//! Defaults of `thermorph sweep` from the case ([sweep]).
struct SweepSpec {
  std::vector<std::string> metrics;  //!< selectors, as --metric
  std::string window;                //!< "START:END"
  bool steady = false;
};

//! Cold-induced vasodilation of a local controller's segments (Lewis 1930, the "hunting" reaction); form: our
//! choice. Extra shunt opening c in [0, 1] with a first-order lag towards clamp((threshold - T_skin) / width, 0, 1).
struct CivdSpec {
  double threshold = 285.15;    //!< local skin temperature below which the shunts open [K]
  double width = 2.0;           //!< full opening this far below the threshold [K]
  double opening = 1.0;         //!< extra shunt flow at full opening, times shunt_flow_max [1]
  double timeConstant = 300.0;  //!< mean delay of the opening [s]
  int stages = 1;               //!< first-order lags in the chain, each timeConstant / stages
};

//! A local vasomotor controller ([control.local.NAME]): the body-wide controller's form, acting on the named
//! segments only (which the body-wide [control.vasomotor] then leaves alone).
struct LocalControllerSpec {
  std::string name;
  std::vector<std::string> segments;
  ControlSignal signal = ControlSignal::LocalSkin;
  double setPoint = 303.15;     //!< [K]
  double gain = 1.0;            //!< skin perfusion gain [1/K]
  double lower = 0.1, upper = 4.0;
  double shuntGain = 1.0;       //!< [1/K]
  double timeConstant = 120.0;  //!< [s]
  bool enabled = true;
  std::optional<CivdSpec> civd;
};

struct ControlSpec {
  ControllerSpec vasomotor, shivering, panting;
  std::vector<LocalControllerSpec> local;  //!< in the order of the case file
  //! [control.sweating]: wetted fraction of the named segments' skin w_0 + clamp(gain (T - set_point), 0, max), at
  //! most max (lower = 0, upper = max); w_0 the segment's own (surface.wetted_fraction and its events).
  ControllerSpec sweating;
  std::vector<std::string> sweatingSegments;  //!< as given (empty: every segment without a coat)
};


//! A file a case was read from (provenance): the case text itself, then every file it reads (weather, ...).
struct InputFile {
  std::string role;    //!< "case", or the key that names the file (e.g. "environment.weather")
  std::string path;    //!< as resolved when read
  std::string sha256;  //!< SHA-256 of the bytes read (64 hex digits)
};

struct SegmentGridEstimate;  // models/grid.hpp

struct Case {
  std::string title;
  std::string sourceFile;  //!< path of the case file
  std::vector<InputFile> inputs;  //!< the case text and every file it read, with their SHA-256
  RunSpec run;
  CirculationSpec circulation;
  BodySpec body;
  ControlSpec control;
  SweepSpec sweep;
  std::map<std::string, TissueProperties> tissues;  //!< built-ins merged with [tissues.*]
  std::vector<SegmentSpec> segments;
  EnvironmentSpec environment;
  std::vector<EventSpec> events;
  std::vector<std::string> warnings;  //!< found while loading (grids coarser than needed); Body reports them
  //! The entries of warnings that describe the timeline after t = 0 (a coat leaving the water, an override the
  //! timeline takes over): a steady solve uses the t = 0 conditions, so they do not apply to it (Body::steadyWarnings).
  std::vector<std::string> timelineWarnings;
  //! The values the case text gives (overrides applied) in the tables where a key can be without effect
  //! ([environment], [control], [body], [circulation], [tissues], each segment's surface), by key path as --set
  //! writes it, each with the line and column of its value (0: an override): what the user gave, as opposed to
  //! defaults. Keys with no effect warn only when given (models/inert_keys.hpp), and the resolved case leaves out
  //! only keys with no effect that were not given. [[events]] values carry their own flag (EnvironmentValue::given).
  struct GivenAt {
    unsigned line = 0, column = 0;
  };
  std::map<std::string, GivenAt> given;
  //! The grid estimate resolveGrid() worked from, per segment (it does not depend on the cell counts), kept for the
  //! checks after a run (drivers/record_control_grid.cpp) so that they need not estimate again; null when the case
  //! was not resolved.
  std::shared_ptr<const std::vector<SegmentGridEstimate>> gridEstimates;
};

//! The segments [control.sweating] wets (its `segments`, or every segment without a coat), as flags by segment
//! index; all 0 without [control.sweating].
std::vector<char> sweatingSegments(const Case& c);

//! Upper limit on the total number of nodes in one case (memory and run time guard).
inline constexpr long maxCells = 2'000'000;
//! Upper limits checked when a case is loaded (README "Limits"): segments, outputs per run (duration /
//! output_interval), steps forced by max_step per run and per output interval (CVODE's step limit per call).
inline constexpr std::size_t maxSegments = 1'000;
inline constexpr long maxOutputs = 10'000'000;
inline constexpr long maxForcedSteps = 10'000'000;
inline constexpr long maxStepsPerOutput = 1'000'000;

//! Load and validate a case file, applying `--set KEY=VALUE` overrides in order. Throws CaseError.
Case loadCase(const std::string& path, const std::vector<std::string>& overrides = {});

//! The text of a case: `text` when given (a case given as text or a dict by the Python module), else the file
//! `path`'s (CaseError naming the path when it cannot be read). The drivers that take a case as options (sweep,
//! fit, sensitivity, uncertainty) read it through this, so every one takes a text as the module gives it.
std::string caseText(const std::string& path, const std::string& text = {});

//! Load from TOML text (tests); `sourceName` is used in messages.
Case loadCaseFromString(const std::string& text, const std::string& sourceName,
                        const std::vector<std::string>& overrides = {});

//! The fully resolved case as TOML text (SI values, every default filled in).
std::string resolvedCaseToml(const Case& c);

//! Per segment of a case whose tree is valid: its copies in the body (count times its parent's copies) [1].
std::vector<double> segmentCopies(const Case& c);
//! Per segment: its outer lateral area less its children's footprints (count times footprintSection) and, a sphere
//! child, its own contact patch, per copy [m2] (the sum of Body's lateral faces' areas unless children cover over
//! 90 % of an axial cell, where Body keeps 10 % exposed).
std::vector<double> exposedLateralAreas(const Case& c);
//! Whether segment `g` follows the body-wide [control.vasomotor]: it has a layer of role skin or shunts
//! (vessels.shunt_flow_max > 0), and no [control.local.NAME] names it. When no segment does, the body-wide
//! controller drives nothing: Body builds none, the automatic grid does not refine for it, and its keys warn
//! (models/inert_keys.hpp).
bool followsBodyWideVasomotor(const Case& c, std::size_t g);
//! Some segment follows the body-wide [control.vasomotor] (followsBodyWideVasomotor).
bool bodyWideVasomotorActs(const Case& c);
//! Some segment with shunts (vessels.shunt_flow_max > 0) follows the body-wide [control.vasomotor]. When none does,
//! its shunt opening drives nothing: Body builds no state for it (whose shunt_gain would otherwise move the
//! integrator's steps) and control.vasomotor.shunt_gain warns (models/inert_keys.hpp).
bool bodyWideShuntsAct(const Case& c);

//! The local controller has a CIVD that can act: civd.opening > 0. With opening 0 it adds no shunt flow at any
//! temperature: Body builds no states for it (which would otherwise move the integrator's steps), the automatic grid
//! does not refine for it, and its keys warn (models/inert_keys.hpp).
inline bool civdActs(const LocalControllerSpec& l) { return l.civd && l.civd->opening > 0.0; }
//! The [[events]] entry and its target that set segment `segment`'s vasomotor value `key` (shunt,
//! superficial_return, ...) by a step at t = 0 s (at = 0, ramp = 0; a ramp starts from the value before it), or
//! {nullptr, nullptr}: the segment's own value then never acts, neither in the physiology's schedules nor (for
//! superficial_return) in which terms Body builds (models/inert_keys.hpp).
std::pair<const EventSpec*, const VasomotorTarget*> vasomotorSetAtStart(const Case& c, const std::string& segment,
                                                                        std::optional<double> VasomotorTarget::*key);

//! Markdown reference of every case key (generated from the schema).
std::string caseReferenceMarkdown();

}  // namespace thermorph
