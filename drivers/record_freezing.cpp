#include "drivers/record_freezing.hpp"

#include <fmt/format.h>

#include "models/media.hpp"

namespace thermorph {

FreezeWatch::FreezeWatch(const Body& body) : network_(body.network()) {
  for (const SegmentMesh& m : body.segments()) {
    Segment s;
    s.mesh = &m;  // the body outlives the watch (as network_); no copy of the node list (8 bytes per node)
    s.name = m.name;
    segments_.push_back(std::move(s));
  }
}

void FreezeWatch::observe(double t, std::span<const double> y) {
  for (Segment& s : segments_)
    for (int iz = 0; iz < s.mesh->nz; ++iz)
      for (int ir = 0; ir <= s.mesh->skinCell; ++ir) {
        const Index node = s.mesh->node(iz, ir);
        const double T = y[node];
        if (!(T < kZeroCelsius)) continue;
        if (!s.froze) {
          s.froze = true;
          s.firstTime = t;
          s.minimum = T;
          s.minimumTime = t;
          s.where = network_.label(node);
        } else if (T < s.minimum) {
          s.minimum = T;
          s.minimumTime = t;
          s.where = network_.label(node);
        }
      }
}

std::vector<std::string> FreezeWatch::warnings() const {
  std::vector<std::string> out;
  for (const Segment& s : segments_)
    if (s.froze)
      out.push_back(fmt::format("segment {}: tissue below 0 degC (freezing): minimum {:.4g} degC at t = {:g} s ({}), "
                                "first below 0 degC at t = {:g} s (checked at outputs); the model has no latent heat "
                                "of freezing, so temperatures below 0 degC are outside what it describes",
                                s.name, s.minimum - kZeroCelsius, s.minimumTime, s.where, s.firstTime));
  return out;
}

}  // namespace thermorph
