#include "models/case_schema.hpp"

#include <array>
#include <limits>

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
          "Initial state: uniform `initial_temperature`, or the steady state of the case at t = 0."},
    Param{"run.initial_temperature", K::Quantity, "K", "37 degC", tMin, tMax, false, "",
          "Uniform initial temperature of every node."},
    Param{"run.rtol", K::Number, "", "1e-6", 1e-12, 1e-2, false, "", "Relative tolerance of the integrator."},
    Param{"run.atol", K::Quantity, "K", "1e-6 K", 1e-12, 1.0, false, "",
          "Absolute tolerance on temperatures (a temperature difference; give it in K)."},
    Param{"run.max_step", K::Quantity, "s", "0 s", 0, 1e9, false, "", "Largest integrator step; 0: no limit."},

    Param{"circulation", K::Table, "", "", 0, 0, false, "", "Blood properties and arterial supply."},
    Param{"circulation.blood_density", K::Quantity, "kg/m3", "1050 kg/m3", 0, 5000, true, "",
          "Blood density (McIntosh & Anderson 2010, from memory)."},
    Param{"circulation.blood_specific_heat", K::Quantity, "J/(kg K)", "3617 J/(kg K)", 0, 1e4, true, "",
          "Blood specific heat (McIntosh & Anderson 2010, from memory)."},
    Param{"circulation.fixed_arterial_temperature", K::Quantity, "K", "", tMin, tMax, false, "",
          "Pins the arterial blood temperature (validation, clamped-core experiments)."},
    Param{"circulation.q10_reference", K::Quantity, "K", "37 degC", tMin, tMax, false, "",
          "Temperature at which tissue metabolic rates equal their stated values."},

    Param{"tissues", K::NamedTables, "", "", 0, 0, false, "",
          "Override built-in tissues or define new ones: `[tissues.NAME]`."},
    Param{"tissues.*.base", K::Text, "", "", 0, 0, false, "",
          "Built-in tissue whose values a new tissue starts from (default: the tissue of the same name)."},
    Param{"tissues.*.conductivity", K::Quantity, "W/(m K)", "", 0, 1e3, true, "", "Thermal conductivity."},
    Param{"tissues.*.density", K::Quantity, "kg/m3", "", 0, 2e4, true, "", "Density."},
    Param{"tissues.*.specific_heat", K::Quantity, "J/(kg K)", "", 0, 1e5, true, "", "Specific heat capacity."},
    Param{"tissues.*.metabolic_heat", K::Quantity, "W/m3", "", 0, 1e6, false, "",
          "Basal volumetric heat production at the Q10 reference temperature."},
    Param{"tissues.*.perfusion", K::Perfusion, "1/s", "", 0, 1.0, false, "",
          "Basal blood perfusion: 1/s, or volume per tissue mass per time, e.g. \"30 mL/(100 g min)\"."},
    Param{"tissues.*.q10", K::Number, "", "", 1.0, 10.0, false, "", "Q10 of metabolic heat."},
    Param{"tissues.*.wet_conductivity", K::Quantity, "W/(m K)", "", 0, 1e3, true, "",
          "Coats only: conductivity when immersed."},

    Param{"segments", K::TableArray, "", "", 0, 0, false, "", "Body segments, one `[[segments]]` each."},
    Param{"segments[].name", K::Text, "", "", 0, 0, false, "", "Unique segment name (used in results and key paths)."},
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
          "Cells along the length (cylinder, cone, plate; a sphere has 1)."},
    Param{"segments[].layers", K::TableArray, "", "", 0, 0, false, "",
          "Concentric tissue layers, inside out: `[{ tissue, thickness, cells }, ...]`."},
    Param{"segments[].layers[].tissue", K::Text, "", "", 0, 0, false, "", "Tissue name (built-in or [tissues.NAME])."},
    Param{"segments[].layers[].thickness", K::Quantity, "m", "", 0, 10, true, "",
          "Layer thickness; the first layer of a sphere or cylinder: its radius; of a plate: its half-thickness. "
          "The first layer's thickness may be omitted when the segment's radius or thickness is given."},
    Param{"segments[].layers[].cells", K::Integer, "", "1", 1, 100000, false, "", "Radial cells in the layer."},
    Param{"segments[].coat", K::Table, "", "", 0, 0, false, "", "Optional fur or feather coat: `{ material, thickness, cells }`."},
    Param{"segments[].coat.material", K::Text, "", "fur", 0, 0, false, "", "Coat material (fur, feathers or a [tissues.NAME])."},
    Param{"segments[].coat.thickness", K::Quantity, "m", "", 0, 1, true, "", "Coat thickness."},
    Param{"segments[].coat.cells", K::Integer, "", "2", 1, 10000, false, "", "Radial cells in the coat."},
    Param{"segments[].surface", K::Table, "", "", 0, 0, false, "", "Surface properties of the segment."},
    Param{"segments[].surface.ends", K::Choice, "", "exposed", 0, 0, false, "exposed|insulated",
          "Cylinder and cone end faces: exchange heat with the medium, or insulated."},
    Param{"segments[].surface.convection", K::Quantity, "W/(m2 K)", "", 0, 1e5, false, "",
          "Fixed convection coefficient for this segment (overrides [environment] convection)."},

    Param{"environment", K::Table, "", "", 0, 0, false, "", "The medium around the animal."},
    Param{"environment.temperature", K::Quantity, "K", "20 degC", tMin, tMax, false, "", "Medium temperature."},
    Param{"environment.convection", K::Quantity, "W/(m2 K)", "10 W/(m2 K)", 0, 1e5, false, "",
          "Fixed convection coefficient for every exposed face."},
};

}  // namespace

std::span<const Param> caseSchema() { return params; }

const Param* findParam(std::string_view pattern) {
  for (const Param& p : params)
    if (p.path == pattern) return &p;
  return nullptr;
}

}  // namespace thermorph
