// Seeded mutation fuzzing of the case loader and of --set / --vary specs (issue 15). The seeds are the shipped
// cases (cases/*.toml, listed at run time) and the keys come from the schema, so new cases and new keys are fuzzed
// as they are added. Each mutated input must either load (and then build a body and reload from its resolved
// TOML) or throw CaseError with a message: no crash, no hang, no other exception.
//
// Bounded: THERMORPH_FUZZ_INPUTS inputs (default 1500) or THERMORPH_FUZZ_SECONDS seconds (default 4), whichever
// comes first; THERMORPH_FUZZ_SEED (default 15) picks the sequence. Input k of a run uses the generator seeded
// with SEED + k, so a failure names what reproduces it. The sanitizer build runs the same test.
#include <catch2/catch.hpp>
#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <random>
#include <sstream>

#include <fmt/format.h>

#include "drivers/sweep.hpp"
#include "models/body.hpp"
#include "models/case.hpp"
#include "models/case_schema.hpp"

using namespace thermorph;

namespace {

struct Seed {
  std::string path, text;
};

std::vector<Seed> shippedCases() {
  std::vector<Seed> seeds;
  for (const auto& entry : std::filesystem::directory_iterator(THERMORPH_SOURCE_DIR "/cases"))
    if (entry.path().extension() == ".toml") {
      std::ifstream in(entry.path(), std::ios::binary);
      std::stringstream buffer;
      buffer << in.rdbuf();
      seeds.push_back({entry.path().string(), buffer.str()});
    }
  std::sort(seeds.begin(), seeds.end(), [](const Seed& a, const Seed& b) { return a.path < b.path; });
  return seeds;
}

long environmentLong(const char* name, long fallback) {
  const char* value = std::getenv(name);
  return value ? std::strtol(value, nullptr, 10) : fallback;
}

//! Values that probe edges: empty, signs, huge and tiny, non-finite, wrong types, wrong units, odd names.
const std::vector<std::string> valuePool = {
    "\"\"",          "0",           "-1",           "1e308",          "-1e308",      "1e-320",     "nan",
    "inf",           "-inf",        "true",         "[]",             "{}",          "[1, 2]",     "{ a = 1 }",
    "\"x\"",         "\"0 K\"",     "\"-100 degC\"", "\"100 degC\"",   "\"1e400 m\"", "\"-0 m\"",   "\"5 kg\"",
    "\"nan m\"",     "\"18\"",      "\"fore/limb\"", "\".\"",          "\"all\"",     "\"body\"",   "\"muscle\"",
    "\"fur\"",       "\"air\"",     "\"water\"",    "\"sphere\"",     "\"1 h\"",     "\"1e-9 s\"", "\"2 cm\"",
    "2147483648",    "-2147483649", "100000",       "\"\\u0000\"",    "\"log\"",     "1979-05-27", "\"30 mL/(100 g min)\""};

//! Fragments inserted anywhere.
const std::vector<std::string> fragments = {
    "[[segments]]\n", "[run]\n", "[environment]\n", "[[events]]\nat = \"1 min\"\n", " = ", "=", "\"", "'", "[", "]",
    "{", "}", ".", ",", "#", "\n", "\\", "\"\"\"", "'''", " m", " K", " degC", " kg", " 1/s", ":", "-", "e", "0",
    "a.b.c = 1\n", "[tissues.x]\n", "parent = \"trunk\"\n", "name = \"\"\n", "count = 0\n"};

//! Last components of every schema key ("length", "set_point", ...): new keys join automatically.
std::vector<std::string> schemaKeys() {
  std::vector<std::string> keys;
  for (const Param& p : caseSchema()) {
    std::string path(p.path);
    auto dot = path.find_last_of('.');
    std::string last = dot == std::string::npos ? path : path.substr(dot + 1);
    if (last.size() > 2 && last.substr(last.size() - 2) == "[]") last.resize(last.size() - 2);
    keys.push_back(last);
  }
  return keys;
}

//! Full key paths for --set: the schema's patterns with [] and * filled from the case (names or indices).
std::vector<std::string> setKeys(const Case& c) {
  std::vector<std::string> keys;
  const std::string segment = c.segments.empty() ? "0" : c.segments.front().name;
  for (const Param& p : caseSchema()) {
    std::string path(p.path), out;
    for (std::size_t i = 0; i < path.size(); ++i) {
      if (path.compare(i, 11, "segments[].") == 0 || path == "segments[]") {
        out += "segments." + segment;
        i += 9;
      } else if (path.compare(i, 2, "[]") == 0) {
        out += ".0";
        ++i;
      } else if (path[i] == '*') {
        out += "muscle";
      } else {
        out += path[i];
      }
    }
    keys.push_back(out);
  }
  return keys;
}

std::vector<std::string> lines(const std::string& text) {
  std::vector<std::string> out;
  std::stringstream ss(text);
  for (std::string line; std::getline(ss, line);) out.push_back(line);
  return out;
}

std::string joinLines(const std::vector<std::string>& ls) {
  std::string out;
  for (const std::string& l : ls) out += l + "\n";
  return out;
}

class Mutator {
 public:
  explicit Mutator(std::uint64_t seed) : random_(seed) {}

  std::size_t below(std::size_t n) { return n == 0 ? 0 : std::uniform_int_distribution<std::size_t>(0, n - 1)(random_); }
  template <class T>
  const T& pick(const std::vector<T>& v) { return v[below(v.size())]; }

  //! One to four mutations, byte-wise or structural.
  std::string mutate(std::string text, const std::vector<std::string>& keys) {
    const std::size_t roll = below(10), count = roll < 7 ? 1 : roll < 9 ? 2 : 3 + below(2);
    for (std::size_t m = 0; m < count; ++m) {
      if (text.empty()) text = "x";
      switch (below(9)) {
        case 0: {  // one byte, often a TOML metacharacter
          const std::string alphabet = "\"'[]{}=.,#\n\\0123456789-e +:\t";
          text[below(text.size())] = below(4) == 0 ? static_cast<char>(below(256)) : alphabet[below(alphabet.size())];
          break;
        }
        case 1: text.insert(below(text.size() + 1), pick(fragments)); break;
        case 2: text.erase(below(text.size()), 1 + below(20)); break;
        case 3: {  // delete, duplicate or swap lines
          std::vector<std::string> ls = lines(text);
          if (ls.size() < 2) break;
          const std::size_t a = below(ls.size()), b = below(ls.size());
          const std::size_t how = below(3);
          if (how == 0) ls.erase(ls.begin() + static_cast<std::ptrdiff_t>(a));
          else if (how == 1) ls.insert(ls.begin() + static_cast<std::ptrdiff_t>(a), ls[b]);
          else std::swap(ls[a], ls[b]);
          text = joinLines(ls);
          break;
        }
        case 4:
        case 5: {  // the value of a key = value line
          std::vector<std::string> ls = lines(text);
          std::vector<std::size_t> assignments;
          for (std::size_t i = 0; i < ls.size(); ++i)
            if (ls[i].find(" = ") != std::string::npos && ls[i][0] != '#') assignments.push_back(i);
          if (assignments.empty()) break;
          std::string& line = ls[pick(assignments)];
          line = line.substr(0, line.find(" = ") + 3) + pick(valuePool);
          text = joinLines(ls);
          break;
        }
        case 6: {  // the key of a key = value line: another key of the schema
          std::vector<std::string> ls = lines(text);
          std::vector<std::size_t> assignments;
          for (std::size_t i = 0; i < ls.size(); ++i)
            if (ls[i].find(" = ") != std::string::npos && ls[i][0] != '#' && ls[i][0] != ' ') assignments.push_back(i);
          if (assignments.empty()) break;
          std::string& line = ls[pick(assignments)];
          line = pick(keys) + line.substr(line.find(" = "));
          text = joinLines(ls);
          break;
        }
        case 7: text.resize(below(text.size() + 1)); break;
        case 8: {  // a copy of a random stretch elsewhere
          const std::size_t from = below(text.size()), length = 1 + below(200);
          text.insert(below(text.size() + 1), text.substr(from, length));
          break;
        }
      }
    }
    return text;
  }

  //! A --vary SPEC: ranges, logs and lists of edge values, sometimes mutated.
  std::string spec() {
    auto value = [&] {
      const std::vector<std::string> v = {"0", "-1", "1", "2 cm", "12 cm", "-5 degC", "40degC", "1e308", "nan", "",
                                          "inf", "1 mL/min", "0 mL/min", "x", "3 kg", "1e-300", "-0"};
      return pick(v);
    };
    auto countText = [&] {
      const std::vector<std::string> v = {"1", "2", "3", "0", "-1", "1000001", "1e3", "2.5", "", "99999999999999999999"};
      return pick(v);
    };
    std::string s;
    const std::size_t items = 1 + below(3);
    for (std::size_t i = 0; i < items; ++i) {
      if (i) s += ",";
      switch (below(3)) {
        case 0: s += value(); break;
        case 1: s += value() + ":" + value() + ":" + countText(); break;
        case 2: s += "log:" + value() + ":" + value() + ":" + countText(); break;
      }
    }
    if (below(4) == 0) s = mutate(s, {":", ",", "log"});
    return s;
  }

 private:
  std::mt19937_64 random_;
};

std::string printable(const std::string& text) {
  std::string out;
  for (char ch : text.substr(0, 600)) {
    const auto u = static_cast<unsigned char>(ch);
    if (ch == '\n') out += "\\n\n";
    else if (u < 0x20 || u >= 0x7f) out += fmt::format("\\x{:02x}", u);
    else out += ch;
  }
  return text.size() > 600 ? out + "..." : out;
}

long cellsOf(const Case& c) {
  long cells = 0;
  for (const SegmentSpec& s : c.segments) {
    long radial = 0;
    for (const LayerSpec& l : s.layers) radial += l.cells;
    if (s.coat) radial += s.coat->cells;
    cells += radial * (s.shape == Shape::Sphere ? 1 : s.axialCells);
  }
  return cells;
}

//! Load (and, when small, build and reload): true when loaded; CaseError is the only allowed failure.
enum class Outcome { Loaded, Refused };
Outcome exercise(const std::string& text, const std::string& path, const std::vector<std::string>& overrides) {
  try {
    const Case c = loadCaseFromString(text, path, overrides);
    if (cellsOf(c) <= 20000) {
      Body body(c);
      (void)body.network().nodes.size();
    }
    // A case that loads reloads from its resolved TOML (what every results file stores).
    (void)loadCaseFromString(resolvedCaseToml(c), path);
    return Outcome::Loaded;
  } catch (const CaseError& e) {
    if (std::string(e.what()).empty()) throw std::logic_error("CaseError without a message");
    return Outcome::Refused;
  }
}

}  // namespace

TEST_CASE("fuzz: mutated shipped cases, --set overrides and --vary specs load or give CaseError",
          "[hardening][fuzz]") {
  const std::vector<Seed> seeds = shippedCases();
  REQUIRE(seeds.size() >= 5);
  const std::vector<std::string> keys = schemaKeys();
  std::vector<std::vector<std::string>> overrideKeys;
  for (const Seed& s : seeds) overrideKeys.push_back(setKeys(loadCaseFromString(s.text, s.path)));

  const long inputs = environmentLong("THERMORPH_FUZZ_INPUTS", 1500);
  const double seconds = static_cast<double>(environmentLong("THERMORPH_FUZZ_SECONDS", 4));
  const auto seed = static_cast<std::uint64_t>(environmentLong("THERMORPH_FUZZ_SEED", 15));
  const auto start = std::chrono::steady_clock::now();
  long done = 0, loaded = 0, refused = 0, specs = 0;
  for (long k = 0; k < inputs; ++k) {
    if (std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count() > seconds) break;
    Mutator m(seed + static_cast<std::uint64_t>(k));
    const std::size_t which = m.below(seeds.size());
    const Seed& base = seeds[which];
    std::string text = base.text;
    std::vector<std::string> overrides;
    std::string what;
    const std::size_t kind = m.below(10);
    if (kind < 6) {
      text = m.mutate(text, keys);
      what = "mutated case";
    } else if (kind < 9) {  // --set KEY=VALUE on the shipped case
      std::string key = m.pick(overrideKeys[which]);
      if (m.below(4) == 0) key = m.mutate(key, {".", "0", "*"});
      std::string value = m.pick(valuePool);
      if (m.below(3) == 0) value = m.mutate(value, keys);
      overrides.push_back(key + "=" + value);
      what = "--set " + overrides.back();
    } else {  // --vary KEY=SPEC: expand, then load a few of the values
      const std::string spec = m.spec();
      what = "--vary SPEC " + spec;
      ++specs;
      try {
        const std::vector<std::string> values = expandSpec(spec, "--vary x");
        if (values.empty()) FAIL("expandSpec gave no values for " << spec);
        const std::string key = m.pick(overrideKeys[which]);
        for (std::size_t v = 0; v < std::min<std::size_t>(values.size(), 2); ++v) overrides.push_back(key + "=" + values[v]);
      } catch (const CaseError& e) {
        CHECK(std::string(e.what()).size() > 0);
        ++done;
        ++refused;
        continue;
      }
    }
    INFO("input " << k << " (THERMORPH_FUZZ_SEED=" << seed << "): " << what << " on " << base.path << "\n"
                  << printable(text));
    try {
      (exercise(text, base.path, overrides) == Outcome::Loaded ? loaded : refused) += 1;
    } catch (const std::exception& e) {
      FAIL("not a CaseError: " << e.what());
    }
    ++done;
  }
  const double elapsed = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  std::printf("[fuzz] %ld inputs in %.2f s (%.0f per second): %ld loaded, %ld refused with CaseError; %ld --vary "
              "specs; seed %llu\n",
              done, elapsed, static_cast<double>(done) / elapsed, loaded, refused, specs,
              static_cast<unsigned long long>(seed));
  CHECK(done >= std::min<long>(inputs, 200));
  CHECK(refused > 0);
  CHECK(loaded > 0);
}
