#pragma once
//! Discretises a case into the thermal network: control volumes per segment, conductances, sources, faces.
#include <memory>
#include <string>
#include <vector>

#include "models/case.hpp"
#include "models/environment.hpp"
#include "solver/network.hpp"

namespace thermorph {

//! Where one segment's cells sit in the state vector and in space.
struct SegmentMesh {
  std::string name;
  Shape shape = Shape::Cylinder;
  Index offset = 0;                 //!< first node of the segment; node (iz, ir) = offset + iz * nr + ir
  int nz = 1;                       //!< axial cells
  int nr = 0;                       //!< radial cells, coat included
  std::vector<double> radius;       //!< [nr] cell-centre distance from the axis or mid-plane at mid-length [m]
  std::vector<double> axial;        //!< [nz] cell-centre distance from the proximal end [m]
  std::vector<int> layer;           //!< [nr] layer index of each radial cell (coat last)
  std::vector<std::string> layerNames;  //!< tissue of each layer, then the coat material
  std::vector<Index> lateralFace;   //!< [nz] face index of the outer lateral face of each axial cell
  std::vector<double> volume;       //!< [nz * nr] cell volumes [m3]
  double area = 0.0;                //!< exposed surface area [m2]
  double tissueVolume = 0.0;        //!< [m3], coat excluded
  double tissueMass = 0.0;          //!< [kg], coat excluded
  Index node(int iz, int ir) const { return offset + static_cast<Index>(iz * nr + ir); }
};

//! The discretised body: network, meshes and the environment model it points to.
class Body {
 public:
  explicit Body(const Case& c);
  Body(const Body&) = delete;
  Body& operator=(const Body&) = delete;

  const Case& spec() const { return case_; }
  const Network& network() const { return network_; }
  const std::vector<SegmentMesh>& segments() const { return meshes_; }
  //! The surroundings; the run loop sets its timeline interval, hence non-const.
  EnvironmentModel& environment() const { return *environment_; }

 private:
  void addSegment(const SegmentSpec& s, Index group);

  Case case_;
  Network network_;
  std::vector<SegmentMesh> meshes_;
  std::unique_ptr<EnvironmentModel> environment_;
  Index metabolismChannel_ = 0, bloodChannel_ = 0;
};

}  // namespace thermorph
