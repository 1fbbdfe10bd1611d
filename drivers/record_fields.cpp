#include "drivers/record_fields.hpp"

#include <cmath>

namespace thermorph {
namespace {
constexpr double kelvinOffset = 273.15;
}

FieldRecorder::FieldRecorder(ResultsFile& f, const Body& body) : body_(body) {
  core_ = f.createSeries("/body/core_temperature", {}, "degC", "core temperature");
  blood_ = f.createSeries("/body/blood_temperature", {}, "degC", "central blood temperature");
  skin_ = f.createSeries("/body/mean_skin_temperature", {}, "degC", "mean skin temperature");
  f.setAttribute("/body/core_temperature", "definition",
                 "volume-weighted mean of the innermost layer of segment " + body.segments()[body.coreSegment()].name);
  f.setAttribute("/body/blood_temperature", "definition", "central blood pool (or the pinned arterial temperature)");
  f.setAttribute("/body/mean_skin_temperature", "definition",
                 "volume mean of the outermost tissue layer (under any coat) of each axial cell, weighted by exposed area and segment count");
  for (const SegmentMesh& m : body.segments()) {
    const std::string g = "/segments/" + m.name;
    const auto nz = static_cast<std::uint64_t>(m.nz), nr = static_cast<std::uint64_t>(m.nr);
    // Coordinates (netCDF dimensions `radius` and `axial` of this segment's group).
    f.writeArray(g + "/radius", m.radius, {m.radius.size()}, "m",
                 "cell-centre distance from the axis (or mid-plane) at mid-length");
    f.writeArray(g + "/axial", m.axial, {m.axial.size()}, "m", "cell-centre distance from the proximal end");
    f.makeCoordinate(g + "/radius");
    f.makeCoordinate(g + "/axial");
    f.writeIntArray(g + "/layer", m.layer.expanded(), "1");
    f.setAttribute(g + "/layer", "long_name", std::string("layer index of each radial cell (see layer_names)"));
    f.writeStringArrayAttribute(g + "/layer", "layer_names", m.layerNames);
    f.attachDimensions(g + "/layer", {"radius"});
    f.writeArray(g + "/volume", m.volume, {nz, nr}, "m3", "cell volume of one copy");
    f.attachDimensions(g + "/volume", {"axial", "radius"});
    f.setAttribute(g, "shape", std::string(shapeName(m.shape)));
    f.setAttribute(g, "surface_area", m.area);
    Segment s;
    s.temperature = f.createSeries(g + "/temperature", {nz, nr}, "degC", "cell temperature", {"axial", "radius"});
    s.surface = f.createSeries(g + "/surface_temperature", {nz}, "degC", "outer surface temperature", {"axial"});
    s.arterial = f.createSeries(g + "/arterial_temperature", {nz}, "degC",
                                "arterial blood temperature (NaN where no blood flows)", {"axial"});
    s.venous = f.createSeries(g + "/venous_temperature", {nz}, "degC",
                              "deep-venous blood temperature (NaN where no blood flows)", {"axial"});
    segments_.push_back(s);
  }
}

BodyTemperatures bodyTemperatures(const Body& body, std::span<const double> y) {
  BodyTemperatures out;
  const SegmentMesh& core = body.segments()[body.coreSegment()];
  double sum = 0.0, volume = 0.0;
  for (int iz = 0; iz < core.nz; ++iz)
    for (int ir = 0; ir < core.innermostLayerCells; ++ir) {
      double v = core.volume[static_cast<std::size_t>(iz * core.nr + ir)];
      sum += v * y[core.node(iz, ir)];
      volume += v;
    }
  out.core = sum / volume;
  out.blood = body.poolNode() ? y[*body.poolNode()]
                              : body.spec().circulation.fixedArterialTemperature.value_or(std::nan(""));
  double skin = 0.0, area = 0.0;
  const Network& n = body.network();
  for (const SegmentMesh& m : body.segments())
    for (int iz = 0; iz < m.nz; ++iz) {
      double a = m.weight * n.faces[m.lateralFace[static_cast<std::size_t>(iz)]].area;
      skin += a * m.skinAt(iz, y);
      area += a;
    }
  out.skin = skin / area;
  return out;
}

void FieldRecorder::writeBodyTemperatures(ResultsFile& f, std::span<const double> y) {
  const BodyTemperatures b = bodyTemperatures(body_, y);
  for (auto [series, value] : {std::pair{core_, b.core}, std::pair{blood_, b.blood}, std::pair{skin_, b.skin}}) {
    double celsius = value - kelvinOffset;
    f.append(series, {&celsius, 1});
  }
}

void FieldRecorder::write(ResultsFile& f, std::span<const double> y, std::span<const double> faceTemperatures) {
  writeBodyTemperatures(f, y);
  for (Index g = 0; g < body_.segments().size(); ++g) {
    const SegmentMesh& m = body_.segments()[g];
    const auto nz = static_cast<std::size_t>(m.nz);
    // In degC as they are written (no copy of the field: 8 bytes per node at a run's peak).
    f.append(segments_[g].temperature, y.subspan(m.offset, nz * static_cast<std::size_t>(m.nr)), kelvinOffset);
    buffer_.resize(nz);
    for (std::size_t iz = 0; iz < nz; ++iz) buffer_[iz] = faceTemperatures[m.lateralFace[iz]] - kelvinOffset;
    f.append(segments_[g].surface, buffer_);
    // Blood streams: arterial and deep-venous temperature per axial cell (NaN where no blood flows).
    for (int which = 0; which < 2; ++which) {
      const std::vector<Index>& nodes = which == 0 ? m.arterial : m.venous;
      for (std::size_t iz = 0; iz < nz; ++iz)
        buffer_[iz] = (nodes.empty() || nodes[iz] == noNode ? std::nan("") : y[nodes[iz]]) - kelvinOffset;
      f.append(which == 0 ? segments_[g].arterial : segments_[g].venous, buffer_);
    }
  }
}

}  // namespace thermorph
