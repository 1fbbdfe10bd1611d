#pragma once
//! Grid resolution from the local decay lengths of each segment: automatic cell counts where a case leaves them
//! out, and warnings where a case gives fewer cells than its headline outputs need.
//!
//! The scheme is second order in space for conduction (harmonic-mean face conductances, DEVELOPERS.md) and along
//! the blood streams where they exchange (trapezoidal exchange and draws, Body::linkExchanger), so the error of a
//! segment's heat flows is estimated from
//!   * the fin parameter m = sqrt((U' + sum_i w_i rho_b c_b A_i) / sum_i k_i A_i) [1/m]: U' the conductance per unit
//!     length from the tissue to the surroundings (surface conductance from the environment's convection,
//!     radiation, evaporation and substrate slopes, a segment that sweats at the wetted fraction sweating can reach,
//!     in series with the coat and tissue radial resistances), the
//!     perfusion term tying tissue to the local arterial temperature (perfusion length sqrt(k / (w rho_b c_b))),
//!     and the axial conductance of all layers. The discrete semi-infinite fin on cells of length dz with a
//!     half-cell junction has the heat flow ratio q_h / q = 2 (1 - r + a^2) / (a (3 - r + a^2)), a = m dz,
//!     r + 1/r = 2 + a^2 (derived in grid.cpp; for small a the error is a^2 / 8);
//!   * the countercurrent exchanger: what it lets through (1 - epsilon, the heat a cooled appendage loses by it)
//!     has a relative error of about 0.5 (NTU/N)^2 on N cells, second order (exact for a balanced counterflow
//!     exchanger away from the ends: Incropera et al. 2007, eq. 11.35 / Table 11.3; constant measured in
//!     tests/test_whole_body.cpp `[exchanger]`, grid.cpp);
//!     the stream that reaches a child carries only the child's flow F_c near the distal end (the artery gives up
//!     the segment's own perfusion on the way): NTU_c = G / (rho_b c_b F_c) at the child's smallest flow, the
//!     child's blood heat off by about kChildStreamErrorConstant (NTU_c/N)^2, weighted by the child's blood share
//!     (measured on tests/test_grid.cpp's limb; grid.cpp);
//!   * each tissue layer's radial cells against its perfusion length and, for curved shapes, its inner radius
//!     (second order; error ~ (dr / scale)^2 / 48, the constant calibrated on the examples), weighted by the share
//!     of the segment's surface heat that crosses the layer's outer face (a fine 1-D radial model of the
//!     cross-section; checked against the exact two-layer slab and cylinder, tests/test_grid_weights.cpp): a
//!     perfused core layer near the arterial temperature delivers little of the surface heat. The core segment's
//!     innermost layer's curvature term counts unweighted (that layer's mean is the core temperature, which the
//!     controllers magnify). The automatic counts keep the unweighted rule (a margin the examples' 4x checks need).
//!   * transient forcing (models/grid.cpp, forcingInterval): a step of the surroundings (an event, or a start
//!     from a uniform temperature) acts on the surface for at least tau, the shortest interval between such
//!     steps (a ramped event: at least its ramp). Over that time it reaches the thermal penetration depth
//!     delta = sqrt(alpha tau) into the tissue (semi-infinite solid, Carslaw & Jaeger 1959, sec. 2.4-2.7;
//!     Incropera et al. 2007, sec. 5.7, eqs. 5.57-5.60), much less than the steady length scales. Cells of
//!     size dx near the surface then miss the surface heat flux at t = tau and the heat exchanged over
//!     [0, tau] by about (dx / delta)^2 / 13 (second order; the constant measured on the finite-volume scheme
//!     against eq. 5.60 for Bi = h delta / k from 0.8 to 800, the worst case). Each layer counts with the share
//!     erfc(depth / (2 delta)) of the step that reaches its outer face (Carslaw & Jaeger 1959, eq. 2.4(7)),
//!     depth measured through the layers outside it in units of their own delta; exposed end faces of
//!     cylinders and cones count with their share of the segment's exposed area.
//!   * after a start from a uniform temperature where controllers act: the heat each layer's cells (coats included)
//!     misplace into the body over its transient, C D^2 / (12 Delta N^2) (storageHeatBound), held within what the
//!     controllers' outputs resolve over their scopes' heat capacities (storageRule, grid.cpp).
//! Segments whose axial profile is forced only by the surroundings (a root with insulated ends) need few axial
//! cells; appendages and exposed ends are resolved to the decay length.
#include <string>
#include <vector>

#include "models/case.hpp"

namespace thermorph {

//! Target of the automatic grid: estimated relative error of a segment's heat flows, chosen so that the
//! outputs lie within 1 % of a grid refined 4x (a second-order error falls by 16 there, a first-order one by 4).
inline constexpr double kGridTargetError = 0.005;
//! The automatic grid's target for a case: half of run.grid_tolerance (default 0.01: kGridTargetError), the
//! estimated error of each segment's heat flows against the converged value, so within the tolerance of 4x.
inline double gridTargetError(const Case& c) { return 0.5 * c.run.gridTolerance; }
//! Warnings name grids whose estimated error exceeds this.
inline constexpr double kGridWarnError = 0.01;
//! Upper limit of automatic axial cells per segment (and of radial cells per layer).
inline constexpr int kMaxAutoAxialCells = 1200;
inline constexpr int kMaxAutoLayerCells = 8;
//! Upper limit of automatic radial cells per layer where the transient penetration depth asks for more.
inline constexpr int kMaxAutoPenetrationCells = 48;
//! Transient error constant: cells of size dx under a surface stepped tau ago miss its heat flux (and the heat
//! exchanged since the step) by about kPenetrationErrorConstant (dx / delta)^2, delta = sqrt(alpha tau)
//! (measured on the scheme against Incropera et al. 2007, eq. 5.60; tests/test_grid_transient.cpp).
inline constexpr double kPenetrationErrorConstant = 1.0 / 13.0;

//! Relative error of the heat through a coat's annular end faces on `cells` radial coat cells: about
//! kCoatCornerConstant / cells^2 (measured on a feathered trunk, coat 2 / 4 / 8 cells against 16 on 320 axial
//! cells: 0.3 / 0.29 / 0.26 of 1 / cells^2 of that heat; tests/test_grid.cpp).
inline constexpr double kCoatCornerConstant = 0.3;

//! Error constant of the exchanger's stream to a child: the child's blood heat misses by about
//! kChildStreamErrorConstant (NTU_c / N)^2 on N axial cells of the parent, NTU_c = G / (rho_b c_b F_c) with F_c the
//! child's smallest blood flow (models/grid.cpp; measured on the limb of tests/test_grid.cpp, where the value per
//! count rises from 0.8 at NTU_c/N = 0.16 to 1.4 at 0.08 and about 3 asymptotically: 1.5 bounds the counts the
//! rule lands on, 5-15 NTU_c).
inline constexpr double kChildStreamErrorConstant = 1.5;

//! Error constant of the exchanger for the blood a segment's own tissue draws along its length (no child beyond):
//! its blood heat misses by about kOwnStreamErrorConstant (NTU/N)^2 on N uniform axial cells, NTU = G / (rho_b c_b
//! F) on the segment's whole flow F. Measured (ours) on a perfused cylinder in a bath, 0.3 m, radius 1 cm, perfusion
//! 0.002 1/s, h 25 / 500 / 5000 W/(m2 K), arterial supply pinned, against the same limb on 2560 cells (the
//! perfused limb of tests/test_whole_body.cpp; tests/test_grid.cpp `[exchanger]`): the value per (NTU/N)^2 at
//! N = 10-160 is 0.17-0.19 at NTU 1, 0.09-0.11 at 3, 0.05-0.09 at 10, 0.02-0.05 at 40 (at NTU 0.3 the error,
//! below 6e-4, is not the exchanger's); on cells graded to Q = 10 and 100 at most 0.04 of NTU^2 sum (dz/L)^3. The
//! pass-through exchanger (a stream that leaves for a child: the counterflow of Incropera et al. 2007, Table 11.3)
//! needs 0.5 (uniform) and 1 (graded): the artery's own stream dwindles along the segment and leaves through the
//! tissue at the local arterial temperature, so the exchanger's discretisation costs it less.
inline constexpr double kOwnStreamErrorConstant = 0.2;

//! A bare child on a coated parent whose skin's Biot length k/h is shorter than the skin: the coat's warm skin
//! meets the child's cold surface at the junction's rim, a corner of size k/h. The automatic grid makes the cells
//! there (the proximal axial cell and the outermost radial cell of the child's skin) at most this fraction of k/h
//! (measured on an invented 0.9 kg swimmer's feet in 10 degC water, k/h = 0.059 mm: foot conduction on corner cells
//! of 0.14 / 0.12 and 0.05 / 0.085 of k/h (axial / radial) 0.72 % and 0.46 % from the feet refined 4x; uniform
//! cells 26 % low; tests/test_grid_weights.cpp).
inline constexpr double kBiotCornerFraction = 0.1;
//! Least radial cells of a skin graded towards such a corner (neighbouring cells then differ by at most
//! Q^(1/12) = 1.8 at Q = 1000).
inline constexpr int kBiotCornerSkinCells = 12;

//! What the estimator found for one segment (for `check` and the warnings).
struct SegmentGridEstimate {
  std::string segment;
  //! The largest surface conductance of the lateral face probed over the timeline (convection, radiation,
  //! evaporation and substrate slopes) [W/(m2 K)]; a segment that sweats evaporates there over the wetted fraction
  //! sweating can reach (sweatingReach), not its own alone.
  double surfaceConductance = 0.0;
  //! The wetted fraction the probe evaporated over on a segment that sweats: max(w_0, control.sweating.max) where
  //! sweating is enabled at some time of the run with a gain > 0 (sweatingActs); -1 for a segment that does not.
  double sweatingReach = -1.0;
  double decayLength = 0.0;   //!< 1/m [m] (infinite: no axial decay)
  double ntu = 0.0;           //!< countercurrent exchanger NTU [1]
  double ownStreamShare = 0.0;  //!< share of the segment's blood flow that perfuses its own tissue (the rest passes to children) [1]
  double childNtu = 0.0;      //!< NTU of the exchanger for the stream that reaches a child, G / (rho_b c_b F_c) [1]
  double childBloodShare = 0.0;  //!< share of that child's heat flows that comes with its blood [1]
  std::string childStream;    //!< that child
  double childAttach = 1.0;   //!< where that child joins, along the segment's length (attach_position) [1]
  bool axialForced = false;   //!< a junction or exposed end forces axial profiles
  bool appendage = false;     //!< has a parent: the junction at its proximal end
  double endWeight = 1.0;     //!< share of the segment's heat flows that passes the forced ends [1]
  int axialNeeded = 1;        //!< axial cells meeting kGridTargetError (uniform)
  //! Where the water line lies at the junction: the grading Q towards it (axial_grading) and the graded cells that
  //! meet kGridTargetError; 1 and axialNeeded elsewhere.
  double gradingNeeded = 1.0;
  int gradedNeeded = 1;
//! A bare child on a coated parent with a short Biot length (kBiotCornerFraction): the radial grading of its
  //! outermost tissue layer (layers[].grading) towards the surface; 1 elsewhere.
  double skinGradingNeeded = 1.0;
  std::vector<double> layerScale;  //!< per layer (coat last) the radial length scale [m]
  std::vector<double> layerWeight; //!< per layer (coat last) share of the surface heat crossing its outer face [1]
  std::vector<double> layerCoreScale;  //!< per layer: radius whose curvature counts unweighted (the core layer) [m]
  std::vector<int> layerNeeded;    //!< per layer (coat last) radial cells meeting kGridTargetError
  double forcingInterval = 0.0;    //!< tau: shortest interval a step of the surroundings acts [s] (0: none)
  std::vector<double> layerPenetration;  //!< per layer (coat last) delta = sqrt(alpha tau) [m] (0: no transient)
  std::vector<double> layerStepShare;    //!< per layer (coat last) erfc(depth / (2 delta)) [1]
  std::vector<double> layerDiffusivity;  //!< per layer (coat last) k / (rho c), the coat's smaller of dry and wet
                                         //!< [m2/s] (0: no heat capacity)
  double endPenetration = 0.0;     //!< delta of the end faces' cross-section (area-weighted alpha) [m]
  std::string waterLineParent;     //!< the parent, when the water line lies at this segment's junction
  double junctionBiotLength = 0.0; //!< a bare child on a coated parent: k/h of its skin at the largest h [m]
  double coatLeavesWater = -1.0;   //!< first probed time a coated segment is out of water after being in it [s]
  double coatWetOnLeaving = 0.0;   //!< its wetted fraction then [1]
  double coatDriedAt = -1.0;       //!< first probed time after that the wetted fraction is 0 in air (-1: not in the
                                   //!< run, or back in water first) [s]
  double coatWetAtEnd = 0.0;       //!< the wetted fraction at the last probed time in air after leaving [1]
  double endShare = 0.0;           //!< exposed end-face area over the segment's exposed area (transient only) [1]
  //! Steady exposed end faces (cylinders, cones; a root's two, a child's distal one), grid.cpp endFaceTerms:
  double tissueEndShare = 0.0;     //!< share of the surface heat leaving through the tissue ends, times the share
                                   //!< of the end resistance that lies in the tissue's axial decay [1]
  double coatEndShare = 0.0;       //!< share of the surface heat leaving through the coat's own annular ends [1]
  double coatEndDecay = 0.0;       //!< axial decay length of the coat next to an exposed end [m]
  double coatEndRadialShare = 0.0; //!< share of the surface heat through the coat's annular ends, for the coat's
                                   //!< radial cells at that corner (kCoatCornerConstant / cells^2 of it) [1]
  //! A start from a uniform temperature: per layer (coat last) C D^2 / Delta [J per copy], C its heat capacity, D the
  //! drop across it on the steady profile of the cross-section (1-D, crossingShares: tissue tied to the arterial
  //! temperature, which stays at the initial one) and Delta the largest contrast between the initial temperature
  //! and the fluid; empty or 0 for a steady start (storageHeatBound).
  std::vector<double> layerStorageHeat;
};

//! Below this share of its range a controller output counts as closed: its grid error is stated relative to that
//! share (the controller-output check, drivers/record_control_grid.cpp, and the automatic grid's storage rule).
inline constexpr double kControlOutputFloor = 0.05;

//! Storage transient after a start from a uniform temperature: the heat a layer's cells send into the body over its
//! transient differs from the exact heat by kStorageErrorConstant (dx / L)^2 C D^2 / Delta (layerStorageHeat).
//! Derivation (ours): the initial excess over the steady profile, phi_0, leaves through the inner face in the share
//! w(x) (the steady profile with the inner face at 1 and the surroundings at 0), so the heat that reaches the body
//! is the integral of rho c phi_0 w; the cell-centred scheme takes it by the midpoint rule, whose error for the
//! product of two linear profiles is (dx^2 / 12) rho c phi_0' w' L = C D (D / Delta) / 12 per cells^2, exact in the
//! slab limit (a coat on a body held at the initial temperature, convection outside: the difference of the scheme
//! from the Carslaw & Jaeger 1959 sec. 3.11 series tends to it; tests/test_grid_transient.cpp). A layer that cools
//! uniformly (small drop across it: a perfused tissue, a low Biot number) misplaces little on any cells.
inline constexpr double kStorageErrorConstant = 1.0 / 12.0;
//! The heat a segment's discretisation can have misplaced in its body (one copy) after a start from a uniform
//! temperature, on its cell counts in `s` [J]: the sum over its layers (coat included) of kStorageErrorConstant
//! (dx / L)^2 layerStorageHeat (dx the layer's largest cell, L its thickness). `layer`: the layer of the largest term.
struct StorageHeatBound {
  double heat = 0.0;  //!< [J]
  std::size_t layer = 0;
  int cells = 1;
};
StorageHeatBound storageHeatBound(const SegmentSpec& s, const SegmentGridEstimate& e);

//! Estimated relative error of a layer's heat flows with `cells` radial cells (steady length scale and transient
//! penetration depth, the larger of the two); graded cells (LayerSpec::grading) by their thickest cell.
double layerGridError(const SegmentGridEstimate& e, std::size_t layer, double thickness, int cells,
                      double grading = 1.0);

//! Relative error of the heat a segment has exchanged with its surroundings t seconds after a step of them (a
//! start from a uniform temperature), on its cell counts in `s`, coat included: the largest over its layers of
//! erfc(depth / (2 delta)) kPenetrationErrorConstant (dx / delta)^2, delta = sqrt(alpha t) (as the transient rule of
//! grid.hpp, but at the time t rather than the case's forcing interval, and with the coat, which the automatic
//! counts leave to the steady rule). `layer`: the layer of the largest (coat: s.layers.size()); `cells` its count.
//! Used by the controller-output check after a run (drivers/record_control_grid.cpp).
struct StorageTransientError {
  double error = 0.0;
  std::size_t layer = 0;
  int cells = 1;
};
StorageTransientError storageTransientError(const SegmentSpec& s, const SegmentGridEstimate& e, double t);

//! The shortest interval tau [s] over which a step of the surroundings acts (models/grid.cpp); 0 when the case
//! has no steps (a steady start and no events).
double forcingInterval(const Case& c);

//! Estimated relative error of a segment's heat flows with nz axial cells, uniform or graded towards the proximal
//! end (grading: SegmentSpec::axialGrading).
double axialGridError(const SegmentGridEstimate& e, double length, int nz, double grading = 1.0);

//! The cheapest automatic axial grid of an appendage (run.axial_grading = "graded"): uniform cells (q 1, the
//! estimate's axialNeeded) or cells graded towards the junction with q of 10, 30, 100, 300, 1000, the fewest cells
//! whose estimated error (axialGridError) meets `target` (ties: the smaller q). Each graded count is found as for a
//! given axial_grading (at least the uniform count up to 10, even).
struct AxialGrid {
  double grading = 1.0;
  int cells = 1;
};
AxialGrid cheapestAxialGrid(const SegmentGridEstimate& e, double length, double target);

//! Whether [control.sweating] can wet a skin during the run: present, gain > 0, max > 0, and enabled at the start or
//! named by an [[events]] entry's control table (which may enable it).
bool sweatingActs(const Case& c);

//! Estimates for every segment of a case (uses the environment's surface conductances over the timeline; a segment
//! that sweats evaporates over the largest wetted fraction sweating can reach, max(w_0, control.sweating.max), at
//! every probed time: the conservative choice, as the run may sweat at max wherever sweatingActs).
std::vector<SegmentGridEstimate> estimateGrid(const Case& c);

//! Estimated relative error of a segment's heat flows on its cell counts in `c` (the largest of the axial and
//! layer errors, as `check` lists it); `e` from estimateGrid(c).
double segmentGridError(const Case& c, std::size_t segment, const SegmentGridEstimate& e);

//! Fill the cell counts the case left out (SegmentSpec::axialAuto, LayerSpec::cellsAuto, CoatSpec::cellsAuto)
//! and append to c.warnings one line per segment whose given grid is estimated to miss 1 %.
void resolveGrid(Case& c);

//! A table for `check`: per segment the axial and radial cells (automatic ones marked), decay length, NTU and the
//! estimated error.
std::string gridSummary(const Case& c);

}  // namespace thermorph
