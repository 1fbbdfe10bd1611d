#include "drivers/record_tissue_limits.hpp"

#include <limits>

#include <fmt/format.h>

#include "models/media.hpp"

namespace thermorph {

TissueLimitWatch::TissueLimitWatch(const Body& body) : network_(body.network()) {
  for (const SegmentMesh& m : body.segments()) {
    Segment s;
    s.mesh = &m;  // the body outlives the watch (as network_); no copy of the node list (8 bytes per node)
    s.name = m.name;
    segments_.push_back(std::move(s));
  }
}

void TissueLimitWatch::Excursion::see(bool beyond, bool moreExtreme, double T, double t, Index node) {
  if (!beyond) return;
  if (!passed) {
    passed = true;
    firstTime = t;
  } else if (!moreExtreme) {
    return;
  }
  extreme = T;
  extremeTime = t;
  where = node;
}

void TissueLimitWatch::observe(double t, std::span<const double> y) {
  const double hot = kZeroCelsius + kHotTissueCelsius;
  for (Segment& s : segments_)
    for (int iz = 0; iz < s.mesh->nz; ++iz) {
      // The row's tissue cells are consecutive nodes: their extremes first (a loop the compiler vectorises), the
      // cells one by one only in a row that passes a limit (a 20 000-cell row: 43 -> 9 instructions per cell).
      const double* const row = y.data() + s.mesh->node(iz, 0);
      double lowest = std::numeric_limits<double>::infinity(), highest = -lowest;
      for (int ir = 0; ir <= s.mesh->skinCell; ++ir) {
        lowest = row[ir] < lowest ? row[ir] : lowest;
        highest = row[ir] > highest ? row[ir] : highest;
      }
      if (!(lowest < kZeroCelsius) && !(highest > hot)) continue;  // (a NaN passes neither test, here or below)
      for (int ir = 0; ir <= s.mesh->skinCell; ++ir) {
        const Index node = s.mesh->node(iz, ir);
        const double T = y[node];
        s.cold.see(T < kZeroCelsius, T < s.cold.extreme, T, t, node);
        s.hot.see(T > hot, T > s.hot.extreme, T, t, node);
      }
    }
}

std::vector<std::string> TissueLimitWatch::warnings() const {
  std::vector<std::string> out;
  for (const Segment& s : segments_) {
    if (s.cold.passed)
      out.push_back(fmt::format("segment {}: tissue below 0 degC (freezing): minimum {:.4g} degC at t = {:g} s ({}), "
                                "first below 0 degC at t = {:g} s (checked at outputs); the model has no latent heat "
                                "of freezing, so temperatures below 0 degC are outside what it describes",
                                s.name, s.cold.extreme - kZeroCelsius, s.cold.extremeTime,
                                network_.label(s.cold.where), s.cold.firstTime));
    if (s.hot.passed)
      out.push_back(fmt::format(
          "segment {}: tissue above {:g} degC (hyperthermia): maximum {:.4g} degC at t = {:g} s ({}), first above "
          "{:g} degC at t = {:g} s (checked at outputs); the model has no heat injury, keeps tissue properties "
          "constant and extrapolates its Q10 law of metabolism (with Q10 = 2, as in most built-in tissues, a tissue's heat doubles every 10 K), so "
          "temperatures above {:g} degC are outside what it describes; heat-injury and lethal limits vary by species "
          "and tissue and must come from your own sources",
          s.name, kHotTissueCelsius, s.hot.extreme - kZeroCelsius, s.hot.extremeTime, network_.label(s.hot.where),
          kHotTissueCelsius, s.hot.firstTime, kHotTissueCelsius));
  }
  return out;
}

}  // namespace thermorph
