#include "models/case_schema.hpp"

#include <array>
#include <limits>
#include <string_view>
#include <unordered_map>

namespace thermorph {
namespace {

constexpr double inf = std::numeric_limits<double>::infinity();
using K = ParamKind;

// Temperature limits for every temperature key: -100 degC to +100 degC [K].
constexpr double tMin = 173.15;
constexpr double tMax = 373.15;

constexpr std::array params = {
    Param{"title", K::Text, "", "", 0, 0, false, "", "Title printed in reports and stored with results."},

    Param{"run", K::Table, "", "", 0, 0, false, "", "Integration settings."},
    Param{"run.duration", K::Quantity, "s", "1 h", 0, 1e9, true, "", "Simulated time."},
    Param{"run.output_interval", K::Quantity, "s", "60 s", 0, 1e9, true, "", "Time between stored outputs."},
    Param{"run.initial", K::Choice, "", "temperature", 0, 0, false, "temperature|steady",
          "Initial state: uniform `initial_temperature`, or the steady state of the case at t = 0 (the surroundings and "
          "physiology of t = 0; a warning says when shivering, panting or sweating is at its limit there)."},
    Param{"run.initial_temperature", K::Quantity, "K", "37 degC", tMin, tMax, false, "",
          "Uniform initial temperature of every node."},
    Param{"run.rtol", K::Number, "", "1e-6", 1e-12, 1e-2, false, "", "Relative tolerance of the integrator."},
    Param{"run.atol", K::Quantity, "K", "1e-6 K", 1e-12, 1.0, false, "",
          "Absolute tolerance on temperatures (a temperature difference; give it in K)."},
    Param{"run.max_step", K::Quantity, "s", "0 s", 0, 1e9, false, "", "Largest integrator step; 0: no limit."},
    Param{"run.grid_refinement", K::Integer, "", "1", 1, 64, false, "",
          "Multiply every axial, layer and coat cell count (given or chosen automatically) by this factor: a grid "
          "convergence check of any command, e.g. `--set run.grid_refinement=4` (see also `thermorph refine`)."},
    Param{"run.grid_tolerance", K::Number, "", "0.01", 1e-4, 0.2, false, "",
          "Tolerance of the automatic grid: the cell counts a case leaves out are chosen so that each segment's heat "
          "flows are estimated within half of it of their converged value, hence within it of a grid refined 4x. "
          "A controller output (shivering, a shunt or CIVD opening) that balances a larger heat flow carries that "
          "error magnified; after each run a check estimates it and warns above 1 % (or this tolerance, if looser), "
          "naming the tolerance that would meet it and, after a start from a uniform temperature, the layer whose "
          "storage transient carries it and the radial cells that would meet it (README, Grid). Given cell counts "
          "are not changed."},
    Param{"run.axial_grading", K::Choice, "", "uniform", 0, 0, false, "uniform|graded",
          "How the automatic grid spaces the axial cells of an appendage (a segment with a parent) whose "
          "`axial_cells` and `axial_grading` are both left out: \"uniform\" cells (the default; graded only where a "
          "water line or a bare skin's Biot corner lies at the junction), or \"graded\": the fewest cells of "
          "uniform and of cells graded towards the junction with Q = 10, 30, 100, 300 or 1000 that meet "
          "run.grid_tolerance by the estimate (ties: the smaller Q). Thin appendages then need far fewer cells "
          "(`thermorph check` names them; README, Grid)."},

    Param{"circulation", K::Table, "", "", 0, 0, false, "", "Blood properties and arterial supply."},
    Param{"circulation.blood_density", K::Quantity, "kg/m3", "1050 kg/m3", 0, 5000, true, "",
          "Blood density (McIntosh & Anderson 2010, from memory)."},
    Param{"circulation.blood_specific_heat", K::Quantity, "J/(kg K)", "3617 J/(kg K)", 0, 1e4, true, "",
          "Blood specific heat (McIntosh & Anderson 2010, from memory)."},
    Param{"circulation.fixed_arterial_temperature", K::Quantity, "K", "", tMin, tMax, false, "",
          "Pins the arterial supply: the central blood pool is replaced by blood at this temperature "
          "(validation, clamped-core experiments)."},

    Param{"circulation.bradycardia_tissues", K::Text, "", "", 0, 0, false, "",
          "Comma-separated tissues whose perfusion the events' `circulation.bradycardia` factor scales "
          "(default: every tissue except those with role brain, whose flow the dive response spares)."},

    Param{"body", K::Table, "", "", 0, 0, false, "", "Whole-body quantities: mass, blood, metabolism."},
    Param{"body.mass", K::Quantity, "kg", "", 0, 1e6, true, "",
          "Body mass for allometry; default: the tissue mass of the segments (counts included)."},
    Param{"body.blood_volume", K::Quantity, "m3", "", 0, 1e3, true, "",
          "Blood volume; default 7 % of body mass (Stahl 1967, from memory). The central pool holds what the "
          "segment vessels do not."},
    Param{"body.cardiac_output", K::Quantity, "m3/s", "", 0, 10, true, "",
          "Cardiac output; default 187 M^0.81 mL/min (Stahl 1967, from memory). Total blood flow above it is a warning."},
    Param{"body.basal_metabolic_rate", K::Text, "", "tissues", 0, 0, false, "",
          "\"tissues\" (sum of tissue rates), \"kleiber\" (70 M^0.75 kcal/day, Kleiber 1932), or a power "
          "(\"45 W\"); the last two scale every tissue rate to match at the Q10 reference temperature."},
    Param{"body.activity", K::Number, "", "1", 0, 50, false, "", "Multiplier on all metabolic heat (activity)."},
    Param{"body.q10_reference", K::Quantity, "K", "37 degC", tMin, tMax, false, "",
          "Temperature at which tissue metabolic rates equal their stated values."},
    Param{"body.core_segment", K::Text, "", "", 0, 0, false, "",
          "Segment whose innermost layer defines the core temperature; default: the root segment."},
    Param{"body.respiratory_segment", K::Text, "", "", 0, 0, false, "",
          "Segment whose innermost layer loses the respiratory heat (evaporation into and warming of the exhaled "
          "air, ventilation proportional to metabolism); respiration is off when no segment is named. No "
          "breathing while that segment is immersed."},
    Param{"body.exhaled_temperature", K::Quantity, "K", "35 degC", tMin, tMax, false, "",
          "Temperature of the exhaled air, saturated (illustrative default, from memory)."},

    Param{"tissues", K::NamedTables, "", "", 0, 0, false, "",
          "Override built-in tissues or define new ones: `[tissues.NAME]`."},
    Param{"tissues.*.base", K::Text, "", "", 0, 0, false, "",
          "Built-in tissue whose values a new tissue starts from (default: the tissue of the same name)."},
    Param{"tissues.*.role", K::Choice, "", "", 0, 0, false, "skin|muscle|fat|bone|viscera|brain|coat|blood|other",
          "What the tissue does, never inferred from its name; default: the role of `base` (a tissue without a "
          "base: other). skin: the vasomotor skin-perfusion factor and controllers act on its perfusion, and "
          "shunts need an outermost skin layer; brain: spared by bradycardia unless "
          "`circulation.bradycardia_tissues` is given; muscle: receives the shivering heat; coat: a coat "
          "material (conduction only, no metabolism or perfusion; wet conductivity when immersed); fat, bone, "
          "viscera, blood, other: no special treatment. Built-ins: skin, muscle, fat (fat, blubber), bone, "
          "viscera, brain, coat (fur, feathers), blood."},
    Param{"tissues.*.conductivity", K::Quantity, "W/(m K)", "", 0, 1e3, true, "", "Thermal conductivity."},
    Param{"tissues.*.density", K::Quantity, "kg/m3", "", 0, 2e4, true, "", "Density."},
    Param{"tissues.*.specific_heat", K::Quantity, "J/(kg K)", "", 0, 1e5, true, "", "Specific heat capacity."},
    Param{"tissues.*.metabolic_heat", K::Quantity, "W/m3", "", 0, 1e6, false, "",
          "Basal volumetric heat production at the Q10 reference temperature."},
    Param{"tissues.*.perfusion", K::Perfusion, "1/s", "", 0, 1.0, false, "",
          "Basal blood perfusion: 1/s, or volume per tissue mass per time, e.g. \"30 mL/(100 g min)\"."},
    Param{"tissues.*.q10", K::Number, "", "", 1.0, 10.0, false, "", "Q10 of metabolic heat."},
    Param{"tissues.*.wet_conductivity", K::Quantity, "W/(m K)", "", 0, 1e3, true, "",
          "Coats only: conductivity when immersed; in air the coat conducts with k + w (wet_conductivity - k), w "
          "the segment's wetted_fraction (linear in the wetness: a modelling choice)."},

    Param{"segments", K::TableArray, "", "", 0, 0, false, "", "Body segments, one `[[segments]]` each."},
    Param{"segments[].name", K::Text, "", "", 0, 0, false, "", "Unique segment name (used in results and key paths)."},
    Param{"segments[].parent", K::Text, "", "", 0, 0, false, "",
          "Segment this one is attached to (omit for the root; exactly one root)."},
    Param{"segments[].count", K::Integer, "", "1", 1, 1000, false, "",
          "Number of identical copies per copy of the parent (2 for a pair of ears): simulated once, heat flows "
          "multiplied. Counts multiply down the tree: a segment stands for its own count times the counts of all its "
          "ancestors (legs count 2 carrying feet count 2: four feet); `thermorph check` shows this number (column n) "
          "and the budget, masses and areas use it."},
    Param{"segments[].contact_radius", K::Quantity, "m", "", 0, 10, true, "",
          "A sphere attached to a parent (a head on a neck): radius a of its contact patch, a disc cut from the "
          "parent's surface and from the sphere's; across it the parent's attachment cell and the sphere's outermost "
          "tissue cell conduct through the spreading resistance 1 / (4 k a) of a disc on a semi-infinite medium "
          "(Incropera et al. 2007, Table 4.1 case 10; k of that tissue). Default: the smaller of the sphere's and the "
          "parent's tissue radius (plate: half-thickness); at most the sphere's tissue radius."},
    Param{"segments[].attach_position", K::Number, "", "0.5", 0, 1, false, "",
          "Where along the parent's length the segment attaches (0 proximal, 1 distal). The child joins the "
          "parent's side over its footprint, centred here (moved inside the parent's length at its ends): along the "
          "parent's axis a plate's width, a cylinder's or cone's outer diameter, a sphere's contact patch. `check` "
          "and `run` warn (at the child's [[segments]] line) when that footprint runs more than twice the parent's "
          "outer diameter there and more than a quarter of its length (heat entering a cylinder spreads through its "
          "cross-section within about a diameter, so the child's heat is placed along the parent, not at a joint: "
          "a 3 cm wide foot plate at the end of a 0.6 cm thick, 6 cm leg heats half the leg), or when the child's "
          "cross-section exceeds the parent's side under the footprint (wider than the parent's circumference "
          "allows)."},
    Param{"segments[].attach_tissue", K::Text, "", "muscle", 0, 0, false, "",
          "Parent tissue layer the child's deep tissue meets at the junction (falls back to the innermost layer). "
          "Each tissue ring of the child's proximal face conducts to the parent's cells at its own depth under the "
          "child's footprint: the layers both share from the outside in (skin to skin, fat to fat, ...) meet each "
          "other while the parent's layer lies outside this one; the child's layers inside those meet the parent "
          "from this layer's inner boundary out to the first shared layer, depth linear in the radius. A sphere "
          "child meets this layer alone."},
    Param{"segments[].shape", K::Choice, "", "", 0, 0, false, "sphere|cylinder|cone|plate", "Geometric shape."},
    Param{"segments[].length", K::Quantity, "m", "", 0, 100, true, "", "Length (cylinder, cone, plate)."},
    Param{"segments[].radius", K::Quantity, "m", "", 0, 10, true, "",
          "Outer tissue radius (sphere, cylinder; coat excluded). Optional if the layers give it."},
    Param{"segments[].radius_proximal", K::Quantity, "m", "", 0, 10, true, "",
          "Cone: outer tissue radius at the proximal end (coat excluded)."},
    Param{"segments[].radius_distal", K::Quantity, "m", "", 0, 10, true, "",
          "Cone: outer tissue radius at the distal end; layers scale with the local radius."},
    Param{"segments[].width", K::Quantity, "m", "", 0, 100, true, "", "Plate width."},
    Param{"segments[].thickness", K::Quantity, "m", "", 0, 10, true, "",
          "Plate total tissue thickness (coat excluded). Optional if the layers give it."},
    Param{"segments[].axial_cells", K::Integer, "", "1", 1, 100000, false, "",
          "Cells along the length (cylinder, cone, plate; a sphere has 1). Leave it out to have it chosen from the "
          "segment's decay lengths (and, at exposed end faces under stepped surroundings, the thermal penetration "
          "depth) so that its heat flows lie within 1 % of a 4x refined grid (README, Grid); a "
          "given value that is estimated to miss 1 % gets a warning."},
    Param{"segments[].axial_grading", K::Number, "", "1", 1, 1e6, false, "",
          "Axial cells graded geometrically towards the proximal end (the junction with the parent): the ratio Q of "
          "the cell length at the distal end to that at the proximal end of the mapping z(x) = L (Q^x - 1) / (Q - 1) "
          "whose cell edges are z(i / axial_cells). 1 is uniform. Neighbouring cells differ by Q^(1/axial_cells), "
          "the longest is Q^((axial_cells - 1)/axial_cells) times the shortest. Refinement (run.grid_refinement, "
          "`thermorph refine`) multiplies axial_cells and keeps Q: every cell splits into N cells along the same "
          "mapping (on one cell, unrefined, Q has no effect, and a given value warns). Left out together with "
          "axial_cells, it is chosen with them: graded where the water line lies at the "
          "segment's junction (the child in water, its parent in air at some time of the run), whose corner uniform "
          "cells resolve only slowly (the smallest Q of 10, 30, 100, 300, 1000 whose proximal cell is at most a "
          "tenth of the outermost tissue layer; that layer also gets four times its automatic radial cells), "
          "uniform elsewhere; uniform whenever axial_cells is given without it (README, Grid)."},
    Param{"segments[].layers", K::TableArray, "", "", 0, 0, false, "",
          "Concentric tissue layers, inside out: `[{ tissue, thickness, cells }, ...]`."},
    Param{"segments[].layers[].tissue", K::Text, "", "", 0, 0, false, "", "Tissue name (built-in or [tissues.NAME])."},
    Param{"segments[].layers[].thickness", K::Quantity, "m", "", 0, 10, true, "",
          "Layer thickness; the first layer of a sphere or cylinder: its radius; of a plate: its half-thickness. "
          "The first layer's thickness may be omitted when the segment's radius or thickness is given."},
    Param{"segments[].layers[].cells", K::Integer, "", "1", 1, 100000, false, "", "Radial cells in the layer; leave it out to have it chosen from the layer's perfusion length and radius and, under surroundings that events step, the thermal penetration depth sqrt(alpha tau) and, after a uniform start where controllers act, the heat its cells misplace (README, Grid)."},
    Param{"segments[].layers[].grading", K::Number, "", "1", 1, 1e6, false, "",
          "Radial cells of the layer graded geometrically towards its outer face: the ratio Q of the cell thickness at "
          "the inner face to that at the outer face of the mapping d(y) = t (Q^y - 1) / (Q - 1) (d the distance from "
          "the outer face, t the layer's thickness) whose cell faces are d(1 - i / cells). 1 is uniform. Refinement "
          "multiplies cells and keeps Q, as axial_grading. On one cell (cells = 1, unrefined) it has no effect, and "
          "a given value warns. Left out together with cells, it is chosen with them: "
          "graded in the outermost layer of a bare child on a coated parent whose skin's Biot length k/h is shorter "
          "than its cells there, uniform elsewhere (README, Grid)."},
    Param{"segments[].coat", K::Table, "", "", 0, 0, false, "", "Optional fur or feather coat: `{ material, thickness, cells }`."},
    Param{"segments[].coat.material", K::Text, "", "fur", 0, 0, false, "", "Coat material (fur, feathers or a [tissues.NAME])."},
    Param{"segments[].coat.thickness", K::Quantity, "m", "", 0, 1, true, "", "Coat thickness."},
    Param{"segments[].coat.cells", K::Integer, "", "2", 1, 10000, false, "", "Radial cells in the coat; leave it out to have it chosen from its radius, its exposed ends and, after a uniform start where controllers act, the heat its cells misplace (README, Grid)."},
    Param{"segments[].surface", K::Table, "", "", 0, 0, false, "", "Surface properties of the segment."},
    Param{"segments[].surface.ends", K::Choice, "", "exposed", 0, 0, false, "exposed|insulated",
          "Cylinder and cone end faces: exchange heat with the medium, or insulated."},
    Param{"segments[].surface.end_coat", K::Choice, "", "on", 0, 0, false, "on|off",
          "Whether a coated segment's coat also covers its exposed end faces: on, the tissue of each end and the "
          "lateral coat's own annular end are under a flat coat layer of the coat's thickness (series resistance "
          "thickness / (k A), no heat capacity; wet conductivity in water); off, both are bare."},
    Param{"segments[].surface.convection", K::Quantity, "W/(m2 K)", "", 0, 1e5, false, "",
          "\"correlation\" or a fixed coefficient for this segment; overrides [environment] convection."},
    Param{"segments[].surface.correlation", K::Choice, "", "standard", 0, 0, false, "standard|mitchell",
          "Forced convection: the shape's correlation (cylinder Churchill & Bernstein 1977, sphere Whitaker 1972, "
          "plate Incropera eqs. 7.30/7.38) or Mitchell (1976) Nu = a Re^b with the length V^(1/3)."},
    Param{"segments[].surface.orientation", K::Choice, "", "vertical", 0, 0, false, "vertical|horizontal",
          "Plates: orientation for free convection (cylinders and cones are taken as horizontal)."},
    Param{"segments[].surface.emissivity", K::Number, "", "", 0, 1, false, "",
          "Long-wave emissivity. Default 0.98 for bare skin (Steketee 1973), 0.95 for a coat (from memory) when "
          "convection comes from correlations; 0 (no radiation) when the segment's convection is a fixed "
          "coefficient, which then stands for the whole dry heat exchange (Newton cooling)."},
    Param{"segments[].surface.solar_absorptivity", K::Number, "", "0.7", 0, 1, false, "",
          "Share of solar radiation absorbed (coats range 0.34-0.90, Dawson et al. 2014)."},
    Param{"segments[].surface.solar_exposure", K::Number, "", "", 0, 1, false, "",
          "Sunlit projected (shadow) area over lateral surface area, the beam normal to the axis (cylinder, cone) "
          "or face (plate). Default: the shape's own shadow: sphere pi R^2 / 4 pi R^2 = 1/4, cylinder 2 R L / "
          "2 pi R L = 1/pi, cone (R0 + R1) L over its lateral area = cos(a)/pi (a: half-angle), plate L w / 2 L w "
          "= 1/2; R at the outer surface, coat included. End faces lie parallel to the beam and absorb no sun."},
    Param{"segments[].surface.sky_view", K::Number, "", "0.5", 0, 1, false, "",
          "Share of the exposed surface's long-wave view filled by the sky (at sky_temperature); the rest sees "
          "radiant_temperature."},
    Param{"segments[].surface.contact_fraction", K::Number, "", "0", 0, 1, false, "",
          "Share of the surface in contact with the substrate (conduction at substrate_conductance); the rest is "
          "exposed to the medium. On a coated segment the contact patch lies on the lateral surface, below 1: the "
          "coat over it conducts from the skin to the substrate, apart from the air-side coat; end faces are exposed. "
          "Holds for the whole run unless [[events]] change it (events[].surface)."},
    Param{"segments[].surface.contact_coat_thickness", K::Quantity, "m", "", 0, 1, true, "",
          "A coated segment's coat under the contact patch (fur or feathers compressed by the body's weight): the "
          "contact column's coat thickness; default the coat's. At most the coat's thickness."},
    Param{"segments[].surface.tucked_into", K::Text, "", "", 0, 0, false, "",
          "Tucking: the name of another segment of the body whose surface covers part of this one (a foot drawn into "
          "the plumage of the trunk, a head under a wing, a tail curled over the body). The covered share "
          "(tucked_fraction) of this segment's lateral surface (a sphere's whole surface; end faces stay exposed) "
          "exchanges nothing with the medium (no convection, radiation, sun, evaporation or substrate there): it "
          "conducts through this segment's outermost tissue half cell and coat, then the host's coat and outermost "
          "tissue half cell, into the host's outermost tissue cells, over a patch of the same area spread over the "
          "host's lateral surface in proportion to each cell's exposed area (budget channel `tucking`). The host "
          "loses that patch from its own exposed lateral area (convection, radiation, evaporation, sun) and its "
          "coat's rings, in the same proportion. Not the segment itself, nor a segment tucked into this one."},
    Param{"segments[].surface.tucked_fraction", K::Number, "", "0", 0, 1, false, "",
          "Share of the lateral surface tucked into the segment `tucked_into` (needs it when above 0); with "
          "contact_fraction at most 1 (a coated segment: below 1, part of its coat stays exposed), and the tucked "
          "area of all the host's guests (f_t A n per copy of the host) with the host's own contact and tucking "
          "at most the host's lateral area (a coated host: below it), children's footprints off, in every interval. "
          "Holds for the whole run unless [[events]] change it (events[].surface.NAME.tucked_fraction)."},
    Param{"segments[].surface.tucked_placement", K::Choice, "", "on_coat", 0, 0, false, "on_coat|in_coat",
          "Where the tucked share lies on its host (surface.tucked_into): \"on_coat\", on the host's outer surface, "
          "which loses the patch (its exposed lateral area and its coat's rings); \"in_coat\", inside the host's "
          "coat (feet buried in plumage), whose outer surface stays whole: the host keeps its exposed area and rings "
          "and the path still crosses the host's whole coat (a host with a coat only). The two bracket the host's "
          "loss."},
    Param{"segments[].surface.wetted_fraction", K::Number, "", "0", 0, 1, false, "",
          "Share of the exposed surface that is wet and evaporates (1: a wet surface); zero in water. On a coated "
          "segment, the coat's outer surface, and the coat conducts partly wet in air (tissues.NAME.wet_conductivity). "
          "Holds for the whole run unless [[events]] change it (events[].surface.NAME.wetted_fraction, stepped or "
          "ramped)."},
    Param{"segments[].surface.immersion", K::Choice, "", "body", 0, 0, false, "body|always|never",
          "\"body\": in the [environment] medium; \"always\": in water (water_temperature when the medium is "
          "air); \"never\": in air (air_temperature when the medium is water)."},

    Param{"segments[].vessels", K::Table, "", "", 0, 0, false, "", "Large vessels of the segment."},
    Param{"segments[].vessels.countercurrent_conductance", K::Quantity, "W/K", "0 W/K", 0, 1e3, false, "",
          "Artery-to-deep-vein heat exchange conductance of the whole segment, shared among its axial cells."},
    Param{"segments[].vessels.shunt_flow_max", K::Quantity, "m3/s", "0 m3/s", 0, 1, false, "",
          "Largest arteriovenous shunt flow through the skin of the distal half, returning by superficial veins."},
    Param{"segments[].vessels.superficial_conductance", K::Quantity, "W/K", "0.001 W/K", 0, 1e3, false, "",
          "Heat exchange of the superficial veins with the skin they run in (whole segment); keeps them defined "
          "when no blood flows (illustrative)."},
    Param{"segments[].vessels.blood_fraction", K::Number, "", "0.03", 1e-4, 0.5, false, "",
          "Volume of large-vessel blood per tissue volume (arteries 1/3, deep veins 1/2, superficial veins 1/6); "
          "illustrative default."},
    Param{"segments[].vasomotor", K::Table, "", "", 0, 0, false, "", "Static vasomotor state of the segment."},
    Param{"segments[].vasomotor.skin_perfusion", K::Number, "", "1", 0, 100, false, "",
          "Multiplier on the perfusion of skin."},
    Param{"segments[].vasomotor.shunt", K::Number, "", "0", 0, 1, false, "",
          "Open fraction of the arteriovenous shunts (times shunt_flow_max)."},
    Param{"segments[].vasomotor.superficial_return", K::Number, "", "0", 0, 1, false, "",
          "Share of the segment's tissue venous return that takes the superficial veins (bypassing the exchanger)."},

    Param{"environment", K::Table, "", "", 0, 0, false, "", "The medium around the animal."},
    Param{"environment.medium", K::Choice, "", "air", 0, 0, false, "air|water|sea_water",
          "Medium around segments with immersion = \"body\" at t = 0 (sea water: 35 g/kg salinity); [[events]] may "
          "step it."},
    Param{"environment.temperature", K::Quantity, "K", "20 degC", tMin, tMax, false, "", "Medium temperature."},
    Param{"environment.speed", K::Quantity, "m/s", "0 m/s", 0, 100, false, "",
          "Speed of the medium relative to the animal (wind or current); 0: free convection only."},
    Param{"environment.convection", K::Quantity, "W/(m2 K)", "correlation", 0, 1e5, false, "",
          "\"correlation\" (forced and free by published correlations at the film temperature, mixed by "
          "Churchill-Usagi, n = 3) or a fixed coefficient for every face."},
    Param{"environment.relative_humidity", K::Quantity, "1", "0.5", 0, 1, false, "",
          "Relative humidity of the air (0.5 or \"50 %\")."},
    Param{"environment.radiant_temperature", K::Quantity, "K", "", tMin, tMax, false, "",
          "Mean radiant temperature of the surroundings; default: the air temperature."},
    Param{"environment.sky_temperature", K::Quantity, "K", "", tMin, tMax, false, "",
          "Effective long-wave sky temperature, seen over sky_view; default: radiant_temperature."},
    Param{"environment.solar_irradiance", K::Quantity, "W/m2", "0 W/m2", 0, 2000, false, "",
          "Solar irradiance on a surface normal to the beam (none reaches segments in water)."},
    Param{"environment.substrate_temperature", K::Quantity, "K", "", tMin, tMax, false, "",
          "Ground or perch temperature; default: the medium temperature."},
    Param{"environment.substrate_conductance", K::Quantity, "W/(m2 K)", "", 0, 1e6, true, "",
          "Contact conductance of the substrate per contact area; required when a contact_fraction is > 0 (given "
          "for a segment or by an event)."},
    Param{"environment.weather", K::Text, "", "", 0, 0, false, "",
          "CSV file (relative to the case) of values over time, linearly interpolated between rows: header "
          "`time [h], temperature [degC], speed [m/s], ...` with [[events]] environment keys and optional units."},
    Param{"environment.water_temperature", K::Quantity, "K", "", tMin, tMax, false, "",
          "While the medium is air: water around segments with immersion = \"always\"; default: temperature."},
    Param{"environment.water_speed", K::Quantity, "m/s", "0 m/s", 0, 100, false, "",
          "While the medium is air: speed of that water."},
    Param{"environment.immersion_water", K::Choice, "", "water", 0, 0, false, "water|sea_water",
          "While the medium is air: kind of that water (default: the medium when it is water at t = 0)."},
    Param{"environment.air_temperature", K::Quantity, "K", "", tMin, tMax, false, "",
          "While the medium is water: air around segments with immersion = \"never\"; default: temperature."},
    Param{"environment.air_speed", K::Quantity, "m/s", "0 m/s", 0, 100, false, "",
          "While the medium is water: speed of that air."},

    Param{"events", K::TableArray, "", "", 0, 0, false, "",
          "Timeline: `[[events]]` step or ramp environment values; the integrator stops at each `at` and "
          "`at + ramp`."},
    Param{"events[].at", K::Quantity, "s", "", 0, 1e9, false, "", "Start time (before run.duration)."},
    Param{"events[].ramp", K::Quantity, "s", "0 s", 0, 1e9, false, "",
          "Duration of a linear ramp from the values at `at` to the targets; 0: a step. Events may not overlap."},
    Param{"events[].environment", K::Table, "", "", 0, 0, false, "",
          "Targets: `environment = { temperature = \"5 degC\", speed = \"3 m/s\" }`; keys as in [environment]."},
    Param{"events[].environment.medium", K::Choice, "", "", 0, 0, false, "air|water|sea_water",
          "A step of the medium (never a ramp): convection, radiation, sun, evaporation and immersion follow it; "
          "the event also gives the new medium's temperature and speed. A coat conducts wet while its segment is "
          "in water."},
    Param{"events[].environment.temperature", K::Quantity, "K", "", tMin, tMax, false, "", "Medium temperature."},
    Param{"events[].environment.speed", K::Quantity, "m/s", "", 0, 100, false, "", "Medium speed."},
    Param{"events[].environment.relative_humidity", K::Quantity, "1", "", 0, 1, false, "", "Relative humidity."},
    Param{"events[].environment.radiant_temperature", K::Quantity, "K", "", tMin, tMax, false, "",
          "Mean radiant temperature (follows the air temperature unless ever given)."},
    Param{"events[].environment.sky_temperature", K::Quantity, "K", "", tMin, tMax, false, "",
          "Sky temperature (follows radiant_temperature unless ever given)."},
    Param{"events[].environment.solar_irradiance", K::Quantity, "W/m2", "", 0, 2000, false, "", "Solar irradiance."},
    Param{"events[].environment.substrate_temperature", K::Quantity, "K", "", tMin, tMax, false, "",
          "Substrate temperature (follows the medium temperature unless ever given)."},
    Param{"events[].environment.water_temperature", K::Quantity, "K", "", tMin, tMax, false, "",
          "While the medium is air (follows temperature unless ever given; with a medium alternating between air "
          "and water, only while it is water)."},
    Param{"events[].environment.water_speed", K::Quantity, "m/s", "", 0, 100, false, "", "While the medium is air."},
    Param{"events[].environment.air_temperature", K::Quantity, "K", "", tMin, tMax, false, "",
          "While the medium is water (follows temperature unless ever given; with a medium alternating between "
          "air and water, only while it is air)."},
    Param{"events[].environment.air_speed", K::Quantity, "m/s", "", 0, 100, false, "", "While the medium is water."},
    Param{"events[].label", K::Text, "", "", 0, 0, false, "", "Name shown in figures (e.g. \"dive 1\")."},
    Param{"events[].span", K::Quantity, "s", "", 0, 1e9, false, "",
          "How long the labelled state lasts, for shading in figures (default: the ramp)."},
    Param{"events[].vasomotor", K::NamedTables, "", "", 0, 0, false, "",
          "Vasomotor targets per segment name, or `all`: `vasomotor = { all = { skin_perfusion = 0.2 }, "
          "ear = { shunt = 1 } }`."},
    Param{"events[].vasomotor.*.skin_perfusion", K::Number, "", "", 0, 100, false, "", "Multiplier on skin perfusion."},
    Param{"events[].vasomotor.*.shunt", K::Number, "", "", 0, 1, false, "", "Open fraction of the shunts."},
    Param{"events[].vasomotor.*.superficial_return", K::Number, "", "", 0, 1, false, "",
          "Share of tissue venous return taking the superficial veins."},
    Param{"events[].surface", K::NamedTables, "", "", 0, 0, false, "",
          "Substrate contact and tucking per segment name, or `all` (contact only), from this event on (a step: not in "
          "an event with a ramp): `surface = { feet = { contact_fraction = 0 } }` (a bird that takes off, an animal "
          "that lies down); and the wetted fraction (stepped, or ramped over the event's `ramp`)."},
    Param{"events[].surface.*.contact_fraction", K::Number, "", "", 0, 1, false, "",
          "As segments[].surface.contact_fraction (a coated segment below 1), which holds until the first event "
          "that changes it. Results store each segment's value at every output (/segments/NAME/contact_fraction)."},
    Param{"events[].surface.*.tucked_fraction", K::Number, "", "", 0, 1, false, "",
          "As segments[].surface.tucked_fraction, into the segment's own surface.tucked_into (a named segment that "
          "has one; not `all`), which holds until the first event that changes it: `surface = { feet = { "
          "tucked_fraction = 0.8 } }` (a bird drawing its feet into its plumage). Results store each tucked "
          "segment's value at every output (/segments/NAME/tucked_fraction)."},
    Param{"events[].surface.*.wetted_fraction", K::Number, "", "", 0, 1, false, "",
          "As segments[].surface.wetted_fraction, for a named segment or `all` (a named segment's value wins within "
          "one event): a step, or with the event's `ramp` a linear change from the value at `at` to this one at `at` + "
          "`ramp` (a coat drying after the water, a licked or wetted patch drying): `surface = { all = { "
          "wetted_fraction = 0 } }` with `ramp = \"40 min\"`. Changes of one segment's value may not overlap. Results "
          "store the value at every output of each segment that an event wets (/segments/NAME/wetted_fraction)."},
    Param{"events[].metabolism", K::Table, "", "", 0, 0, false, "", "Metabolic multipliers."},
    Param{"events[].metabolism.activity", K::Number, "", "", 0, 50, false, "", "Activity multiplier (as [body] activity)."},
    Param{"events[].metabolism.hypometabolism", K::Number, "", "", 0, 1, false, "",
          "Multiplier below 1 for metabolic depression (e.g. during dives); 1: none."},
    Param{"events[].circulation", K::Table, "", "", 0, 0, false, "", "Cardiovascular state."},
    Param{"events[].circulation.bradycardia", K::Number, "", "", 0, 2, false, "",
          "Factor on the perfusion of the [circulation] bradycardia_tissues (dive response: below 1)."},
    Param{"events[].respiration", K::Table, "", "", 0, 0, false, "", "Breathing."},
    Param{"events[].respiration.panting", K::Number, "", "", 0, 50, false, "",
          "Ventilation multiplier (0: breath hold)."},
    Param{"events[].control", K::NamedTables, "", "", 0, 0, false, "",
          "Controller changes by name (vasomotor, shivering, panting, sweating, or the NAME of a [control.local.NAME]): "
          "`control = { vasomotor = { enabled = \"off\" } }`."},
    Param{"events[].control.*.enabled", K::Choice, "", "", 0, 0, false, "on|off", "Switch the controller on or off."},
    Param{"events[].control.*.set_point", K::Quantity, "K", "", tMin, tMax, false, "", "New set point."},

    Param{"sweep", K::Table, "", "", 0, 0, false, "",
          "Defaults for `thermorph sweep` (command-line options win): what each run reports."},
    Param{"sweep.metrics", K::Text, "", "", 0, 0, false, "",
          "Comma-separated metric selectors as for --metric, e.g. \"body.heat_flow, segments.ears.heat_flow, "
          "time_to:body.core_temperature<35 degC\"."},
    Param{"sweep.window", K::Text, "", "", 0, 0, false, "", "Averaging window START:END, e.g. \"30 min:1 h\"."},
    Param{"sweep.mode", K::Choice, "", "transient", 0, 0, false, "transient|steady",
          "Report the transient run, or each run's steady state."},

    Param{"control", K::Table, "", "", 0, 0, false, "",
          "Feedback controllers: proportional control about a set point with limits and a first-order lag "
          "(the common form in thermoregulation models). Defaults are illustrative."},
    Param{"control.vasomotor", K::Table, "", "", 0, 0, false, "",
          "Skin perfusion multiplier 1 + gain (T - set_point) within [min, max], and shunt opening "
          "shunt_gain (T - set_point) within [0, 1] (times each segment's vasomotor.shunt)."},
    Param{"control.vasomotor.signal", K::Choice, "", "core", 0, 0, false, "core|mean_skin", "Controlled temperature."},
    Param{"control.vasomotor.set_point", K::Quantity, "K", "37 degC", tMin, tMax, false, "", "Set point."},
    Param{"control.vasomotor.gain", K::Quantity, "1/K", "1 1/K", 0, 100, false, "", "Skin perfusion gain."},
    Param{"control.vasomotor.min", K::Number, "", "0.1", 0, 100, false, "", "Lowest skin perfusion multiplier."},
    Param{"control.vasomotor.max", K::Number, "", "4", 0, 100, false, "", "Highest skin perfusion multiplier."},
    Param{"control.vasomotor.shunt_gain", K::Quantity, "1/K", "1 1/K", 0, 100, false, "", "Shunt opening gain."},
    Param{"control.vasomotor.time_constant", K::Quantity, "s", "2 min", 0, 1e6, true, "", "First-order lag."},
    Param{"control.vasomotor.enabled", K::Choice, "", "on", 0, 0, false, "on|off", "Initially on or off."},
    Param{"control.shivering", K::Table, "", "", 0, 0, false, "",
          "Extra heat in muscle max_power x clamp(gain (set_point - T), 0, 1), distributed by muscle volume."},
    Param{"control.shivering.signal", K::Choice, "", "core", 0, 0, false, "core|mean_skin", "Controlled temperature."},
    Param{"control.shivering.set_point", K::Quantity, "K", "36 degC", tMin, tMax, false, "", "Set point."},
    Param{"control.shivering.gain", K::Quantity, "1/K", "0.5 1/K", 0, 100, false, "", "Fraction of max_power per K."},
    Param{"control.shivering.max_power", K::Quantity, "W", "", 0, 1e6, true, "",
          "Largest shivering heat of the whole body (default: 3 x the basal rate, illustrative)."},
    Param{"control.shivering.time_constant", K::Quantity, "s", "2 min", 0, 1e6, true, "", "First-order lag."},
    Param{"control.shivering.enabled", K::Choice, "", "on", 0, 0, false, "on|off", "Initially on or off."},
    Param{"control.panting", K::Table, "", "", 0, 0, false, "",
          "Ventilation multiplier 1 + gain (T - set_point) within [1, max] (needs [body] respiratory_segment)."},
    Param{"control.panting.signal", K::Choice, "", "core", 0, 0, false, "core|mean_skin", "Controlled temperature."},
    Param{"control.panting.set_point", K::Quantity, "K", "38.5 degC", tMin, tMax, false, "", "Set point."},
    Param{"control.panting.gain", K::Quantity, "1/K", "3 1/K", 0, 100, false, "", "Multiplier per K."},
    Param{"control.panting.max", K::Number, "", "10", 1, 100, false, "", "Largest ventilation multiplier."},
    Param{"control.panting.time_constant", K::Quantity, "s", "1 min", 0, 1e6, true, "", "First-order lag."},
    Param{"control.panting.enabled", K::Choice, "", "on", 0, 0, false, "on|off", "Initially on or off."},
    Param{"control.sweating", K::Table, "", "", 0, 0, false, "",
          "Sweating: the wetted fraction of each named segment's skin is its own (surface.wetted_fraction and its "
          "[[events]]) plus clamp(gain (T - set_point), 0, max), at most max (a skin wetted beyond max keeps its own); "
          "the evaporation of those segments' faces scales with it. Below the set point sweating adds nothing (it "
          "never dries a wetted skin). The output is the controller state /control/sweating; the wetted fraction is "
          "stored as /segments/NAME/wetted_fraction. Defaults are illustrative."},
    Param{"control.sweating.segments", K::Text, "", "", 0, 0, false, "",
          "Comma-separated names of the segments that sweat, e.g. \"trunk, neck\"; each must have skin as its outer "
          "surface (no coat). Default: every segment without a coat."},
    Param{"control.sweating.signal", K::Choice, "", "core", 0, 0, false, "core|mean_skin", "Controlled temperature."},
    Param{"control.sweating.set_point", K::Quantity, "K", "37.5 degC", tMin, tMax, false, "", "Set point."},
    Param{"control.sweating.gain", K::Quantity, "1/K", "0.3 1/K", 0, 100, false, "", "Wetted fraction added per K."},
    Param{"control.sweating.max", K::Number, "", "0.8", 0, 1, false, "",
          "Largest wetted fraction sweating brings the skin to (at most 1: the whole exposed skin wet). The automatic "
          "grid resolves the segments that sweat for this wetted fraction (or their own, if larger) at every time of "
          "the run where sweating can act (on at the start or switched by an event, gain > 0): their surface "
          "conductance counts evaporation over it, so the cells suit the wettest skin the run may have (the "
          "conservative choice; `check` says so)."},
    Param{"control.sweating.time_constant", K::Quantity, "s", "5 min", 0, 1e6, true, "", "First-order lag."},
    Param{"control.sweating.enabled", K::Choice, "", "on", 0, 0, false, "on|off", "Initially on or off."},
    Param{"control.local", K::NamedTables, "", "", 0, 0, false, "",
          "Local vasomotor controllers `[control.local.NAME]`: the form of [control.vasomotor] acting only on the "
          "named segments, which [control.vasomotor] then leaves alone; a segment may be named by one local "
          "controller only (two: exit 2). NAME is used in [[events]] `control = { NAME = {...} }` and may not be "
          "vasomotor, shivering, panting or sweating. Defaults are illustrative."},
    Param{"control.local.*.segments", K::Text, "", "", 0, 0, false, "",
          "Comma-separated names of the segments it acts on, e.g. \"leg, foot\" (required); each needs a layer "
          "with role skin."},
    Param{"control.local.*.signal", K::Choice, "", "local_skin", 0, 0, false, "core|mean_skin|local_skin",
          "Controlled temperature; local_skin: each segment's own skin (area-weighted outermost tissue layer means of "
          "one copy), so each segment gets its own controller states."},
    Param{"control.local.*.set_point", K::Quantity, "K", "30 degC", tMin, tMax, false, "", "Set point."},
    Param{"control.local.*.gain", K::Quantity, "1/K", "1 1/K", -100, 100, false, "",
          "Skin perfusion gain; negative: perfusion rises as the signal falls below the set point (a floor the "
          "segment's skin is defended at, paid for with body heat)."},
    Param{"control.local.*.min", K::Number, "", "0.1", 0, 100, false, "", "Lowest skin perfusion multiplier."},
    Param{"control.local.*.max", K::Number, "", "4", 0, 100, false, "", "Highest skin perfusion multiplier."},
    Param{"control.local.*.shunt_gain", K::Quantity, "1/K", "1 1/K", -100, 100, false, "",
          "Shunt opening gain; negative: the shunts open as the signal falls below the set point."},
    Param{"control.local.*.time_constant", K::Quantity, "s", "2 min", 0, 1e6, true, "", "First-order lag."},
    Param{"control.local.*.enabled", K::Choice, "", "on", 0, 0, false, "on|off", "Initially on or off."},
    Param{"control.local.*.civd", K::Table, "", "", 0, 0, false, "",
          "Cold-induced vasodilation (Lewis 1930, the \"hunting\" reaction; form: our choice): extra shunt flow "
          "opening x shunt_flow_max x c in each segment, c following clamp((threshold - T_skin) / width, 0, 1) "
          "with a first-order lag (T_skin: the segment's own skin); needs vessels.shunt_flow_max > 0."},
    Param{"control.local.*.civd.threshold", K::Quantity, "K", "12 degC", tMin, tMax, false, "",
          "Local skin temperature below which the shunts open (illustrative)."},
    Param{"control.local.*.civd.width", K::Quantity, "K", "2 K", 0, 100, true, "",
          "Fully open this far below the threshold (a temperature difference: give it in K)."},
    Param{"control.local.*.civd.opening", K::Number, "", "1", 0, 10, false, "",
          "Extra shunt flow at full opening, times vessels.shunt_flow_max. 0: no CIVD (no states are built; the "
          "table warns that it has no effect)."},
    Param{"control.local.*.civd.time_constant", K::Quantity, "s", "5 min", 0, 1e6, true, "",
          "Mean delay of the opening behind its target: one first-order lag of this time constant, or, with stages "
          "= N, a chain of N lags of time_constant / N each (a gamma-distributed delay, the linear chain trick, "
          "MacDonald 1978)."},
    Param{"control.local.*.civd.stages", K::Integer, "", "1", 1, 20, false, "",
          "Number of first-order lags in the chain. One lag lets the opening settle; with 3 or more and a narrow "
          "width the loop skin -> opening -> warm blood -> skin can oscillate, the repeated waves of the hunting "
          "reaction (Lewis 1930)."},
};

}  // namespace

std::span<const Param> caseSchema() { return params; }

const Param* findParam(std::string_view pattern) {
  // A hash index built once (the first entry of a path, as the linear search before it; that search over the
  // whole schema per key was about 1 % of a sweep run's instructions).
  static const std::unordered_map<std::string_view, const Param*> index = [] {
    std::unordered_map<std::string_view, const Param*> m;
    m.reserve(params.size());
    for (const Param& p : params) m.emplace(p.path, &p);
    return m;
  }();
  const auto it = index.find(pattern);
  return it == index.end() ? nullptr : it->second;
}

}  // namespace thermorph
