#include "aerosect/analysis/branch_report.hpp"

#include <cmath>
#include <limits>
#include <numbers>
#include <optional>

#include <fmt/format.h>

#include "aerosect/analysis/report.hpp"
#include "aerosect/analysis/simulate.hpp"
#include "aerosect/error.hpp"
#include "aerosect/io/hdf5_document.hpp"
#include "aerosect/units.hpp"

namespace aerosect {

namespace {

const char* dof_units(int j) { return kDofUnits[j]; }

bool complete(const Branch& b) { return !b.cancelled && !b.points.empty(); }

// JSON has no infinity: null for a non-finite number.
nlohmann::json num(double v) { return std::isfinite(v) ? nlohmann::json(v) : nlohmann::json(); }

}  // namespace

bool shard_holds_branch(int branch, int shard_index, int shard_count) {
  return branch % shard_count == shard_index - 1;
}

nlohmann::json orbits_request_json(const Case& c, const BranchSettings& s) {
  const auto [k, n] = parse_shard(s.shard);
  nlohmann::json j;
  j["format"] = 1;
  j["case_text"] = c.text;
  j["overrides"] = c.overrides;
  j["key"] = s.key;
  j["from"] = s.from ? nlohmann::json(*s.from) : nlohmann::json(nullptr);
  j["to"] = s.to ? nlohmann::json(*s.to) : nlohmann::json(nullptr);
  j["start"] = s.start;
  j["start_amplitude"] = s.start_amplitude ? nlohmann::json(*s.start_amplitude) : nlohmann::json(nullptr);
  j["points"] = s.points;
  j["watch"] = s.watch;
  j["shard"] = {k, n};
  return j;
}

Branch empty_shard_branch(const Case& c, const BranchOptions& o, int shard_index, int shard_count) {
  Branch b;
  b.key = parameter_family(c, o.key).key;
  b.start = o.start;
  if (o.orbit.watched_dof >= 0) b.watched_dof = o.orbit.watched_dof;
  b.stop_reason = fmt::format("shard {}/{} holds no branch (a run traces {} branch, in shard 1/{}); "
                              "this file only completes the series for aerosect merge",
                              shard_index, shard_count, kBranchesPerRun, shard_count);
  return b;
}

void merge_branch_files(const std::vector<std::string>& inputs, const std::string& output,
                        const std::atomic<bool>* cancel) {
  std::optional<nlohmann::json> request;
  std::vector<std::string> by_shard;  // file of each shard, by K - 1
  for (const auto& path : inputs) {
    stop_if_cancelled(cancel);
    nlohmann::json req = nlohmann::json::parse(read_text_attribute(path, "orbits_request"), nullptr, false);
    const auto valid_shard = [&] {
      if (!req.is_object() || !req.contains("shard") || !req["shard"].is_array() || req["shard"].size() != 2)
        return false;
      const auto& sh = req["shard"];
      return sh[0].is_number_integer() && sh[1].is_number_integer() && sh[1].get<long>() >= 1 &&
             sh[1].get<long>() <= 100000 && sh[0].get<long>() >= 1 && sh[0].get<long>() <= sh[1].get<long>();
    };
    if (req.is_discarded() || !valid_shard())
      throw InputError({path, 0, 0}, "orbits_request", "", "is not the request of an aerosect orbits run",
                       "files written by aerosect orbits --shard K/N");
    const int k = req["shard"][0].get<int>(), n = req["shard"][1].get<int>();
    req["shard"] = {1, 1};
    if (request && *request != req)
      throw InputError({path, 0, 0}, "", "", "is a shard of a different orbits run than " + inputs.front(),
                       "the shard files of one orbits command");
    if (!by_shard.empty() && static_cast<int>(by_shard.size()) != n)
      throw InputError({path, 0, 0}, "", "", fmt::format("is shard {}/{}, the others are of {}", k, n, by_shard.size()),
                       "shards of one --shard K/N series");
    if (by_shard.empty()) by_shard.resize(static_cast<std::size_t>(n));
    std::string& slot = by_shard[static_cast<std::size_t>(k - 1)];
    if (!slot.empty())
      throw InputError({path, 0, 0}, "", "", fmt::format("shard {}/{} is given twice", k, n), "each shard once");
    slot = path;
    request = req;
  }
  std::size_t given = 0;
  for (const auto& f : by_shard) given += !f.empty();
  if (!request || given != by_shard.size())
    throw InputError({inputs.empty() ? "" : inputs.front(), 0, 0}, "", "",
                     fmt::format("{} of {} shards given", given, by_shard.size()),
                     "every shard file 1/N..N/N of the orbits run");
  stop_if_cancelled(cancel);
  // The one branch of a run is shard 1's; the others hold none.
  static_assert(kBranchesPerRun == 1, "a merge of several branches per run joins their files");
  copy_with_text_attribute(by_shard.front(), output, "orbits_request", request->dump());
}

void write_branch_file(const std::string& path, const Case& c, const Branch& b, const std::string& sweep_file,
                       const std::string& request) {
  Hdf5Document doc(path);
  RunMetadata meta = case_metadata(c, "orbit_branch");
  if (!request.empty()) meta.text_attributes.push_back({"orbits_request", request});
  meta.text_attributes.push_back({"parameter_key", b.key});
  meta.text_attributes.push_back({"start", to_string(b.start)});
  meta.text_attributes.push_back({"start_detail", b.start_detail});
  meta.text_attributes.push_back({"stop_reason", b.stop_reason});
  meta.text_attributes.push_back({"watched_dof", kDofNames[b.watched_dof]});
  if (!sweep_file.empty()) meta.text_attributes.push_back({"overlay_sweep_file", sweep_file});
  doc.metadata(meta);
  // The envelope, for the figure's V_D and 1.15 V_D marks (as in a flutter file).
  doc.number_attribute("", "density", c.model.flow.density, "kg m-3");
  if (c.dive_speed_eas) {
    doc.number_attribute("", "dive_speed_eas", *c.dive_speed_eas, "m s-1");
    doc.number_attribute("", "clearance_speed_tas", 1.15 * true_airspeed(*c.dive_speed_eas, c.model.flow.density),
                         "m s-1");
  }
  doc.integer_attribute("", "complete", complete(b) ? 1 : 0);
  const std::string key_units = case_key_units(b.key).empty() ? "1" : case_key_units(b.key);
  if (b.hopf_parameter) doc.number_attribute("", "hopf_parameter", *b.hopf_parameter, key_units);
  const std::size_t N = b.points.size();
  doc.integer_attribute("", "points", static_cast<std::int64_t>(N));
  if (N > 0) {
    const int dof = c.model.section.dof;
    std::vector<std::int32_t> idx(N);
    for (std::size_t i = 0; i < N; ++i) idx[i] = static_cast<std::int32_t>(i);
    doc.integer_axis("point", idx, "point number along the branch");
    auto table = [&](const std::string& name, auto&& f, const std::string& units, const std::string& ln) {
      std::vector<double> v(N);
      for (std::size_t i = 0; i < N; ++i) v[i] = f(b.points[i]);
      doc.dataset(name, {"point"}, v, units, ln);
    };
    table("parameter", [](const BranchPoint& p) { return p.parameter; }, key_units,
          "value of the continuation key " + b.key + " (case-file units)");
    table("airspeed", [](const BranchPoint& p) { return p.airspeed; }, "m s-1", "true airspeed");
    table("arclength", [](const BranchPoint& p) { return p.arclength; }, "1", "scaled arclength from the first point");
    table("period", [](const BranchPoint& p) { return p.orbit.period; }, "s", "orbit period (the full period)");
    table("frequency", [](const BranchPoint& p) { return p.orbit.frequency(); }, "Hz", "orbit frequency, 1/period");
    {
      // A class (CF 1.10 §3.5 flags); every point has one, so the fill value is unused.
      std::vector<std::int64_t> stable(N);
      for (std::size_t i = 0; i < N; ++i) stable[i] = b.points[i].orbit.stable ? 1 : 0;
      doc.integer_dataset("stable", {"point"}, stable, "1",
                          "1: every nontrivial Floquet multiplier inside the unit circle, 0: unstable",
                          {{0, 1}, "unstable stable"});
    }
    table("largest_multiplier_modulus", [](const BranchPoint& p) { return p.orbit.largest_nontrivial; }, "1",
          "largest modulus of the nontrivial Floquet multipliers");
    table("residual", [](const BranchPoint& p) { return p.orbit.residual; }, "1",
          "scaled Newton residual of the shooting equations");
    table("trivial_multiplier_error", [](const BranchPoint& p) { return p.orbit.trivial_multiplier_error; }, "1",
          "distance of the multiplier nearest 1 from 1 (accuracy of the monodromy matrix)");
    {
      // Counts: integers.
      std::vector<std::int64_t> switches(N), peaks(N);
      for (std::size_t i = 0; i < N; ++i) {
        switches[i] = b.points[i].orbit.switches;
        peaks[i] = b.points[i].orbit.peaks_per_period;
      }
      doc.integer_dataset("switches_per_period", {"point"}, switches, "1", "spring breakpoints crossed per period", {});
      doc.integer_dataset("peaks_per_period", {"point"}, peaks, "1",
                          "maxima of the watched DOF per period (2: period-2 orbit)", {});
    }
    table("grazing_margin", [](const BranchPoint& p) {
            return std::isfinite(p.orbit.grazing_margin) ? p.orbit.grazing_margin
                                                          : std::numeric_limits<double>::quiet_NaN();
          }, "1", "closest approach of a spring DOF's extremum to a breakpoint over its amplitude (NaN: no breakpoint)");
    const int nh = b.points.front().orbit.content[0].harmonics.empty()
                       ? 0 : static_cast<int>(b.points.front().orbit.content[b.watched_dof].harmonics.size());
    if (nh > 0) {
      std::vector<std::int32_t> h(static_cast<std::size_t>(nh));
      for (int k = 0; k < nh; ++k) h[static_cast<std::size_t>(k)] = k + 1;
      doc.integer_axis("harmonic", h, "harmonic number k of the orbit frequency");
    }
    for (int j = 0; j < dof; ++j) {
      const std::string n = kDofNames[j], u = dof_units(j);
      table(n + "_amplitude", [j](const BranchPoint& p) { return p.orbit.dof[j].amplitude; }, u,
            n + " half peak-to-peak amplitude over one period");
      table(n + "_max", [j](const BranchPoint& p) { return p.orbit.dof[j].max; }, u, n + " largest value");
      table(n + "_min", [j](const BranchPoint& p) { return p.orbit.dof[j].min; }, u, n + " smallest value");
      table(n + "_mean", [j](const BranchPoint& p) { return p.orbit.content[j].mean; }, u, n + " mean over one period");
      table(n + "_rms", [j](const BranchPoint& p) { return p.orbit.content[j].rms; }, u,
            n + " root mean square over one period");
      table(n + "_thd", [j](const BranchPoint& p) { return p.orbit.content[j].thd; }, "1",
            n + " total harmonic distortion: harmonics 2..K against the first (RMS ratio)");
      if (nh > 0) {
        std::vector<double> v(N * static_cast<std::size_t>(nh));
        for (std::size_t i = 0; i < N; ++i)
          for (int k = 0; k < nh; ++k)
            v[i * static_cast<std::size_t>(nh) + static_cast<std::size_t>(k)] =
                b.points[i].orbit.content[j].harmonics[static_cast<std::size_t>(k)];
        doc.dataset(n + "_harmonics", {"point", "harmonic"}, v, u,
                    n + " amplitude of harmonic k over one period (DFT of N samples)");
      }
    }
    // Floquet multipliers (every one, the trivial included), by decreasing modulus.
    const std::size_t M = b.points.front().orbit.multipliers.size();
    std::vector<std::int32_t> mi(M);
    for (std::size_t k = 0; k < M; ++k) mi[k] = static_cast<std::int32_t>(k + 1);
    doc.integer_axis("multiplier", mi, "Floquet multiplier number, by decreasing modulus");
    std::vector<double> re(N * M, std::numeric_limits<double>::quiet_NaN()), im = re;
    for (std::size_t i = 0; i < N; ++i)
      for (std::size_t k = 0; k < M && k < b.points[i].orbit.multipliers.size(); ++k) {
        re[i * M + k] = b.points[i].orbit.multipliers[k].real();
        im[i * M + k] = b.points[i].orbit.multipliers[k].imag();
      }
    doc.dataset("multipliers_real", {"point", "multiplier"}, re, "1", "real part of the Floquet multipliers");
    doc.dataset("multipliers_imag", {"point", "multiplier"}, im, "1", "imaginary part of the Floquet multipliers");
    // The state on the section (restart data).
    const std::size_t S = b.points.front().orbit.x0.size();
    std::vector<std::int32_t> si(S);
    std::string names;
    for (std::size_t k = 0; k < S; ++k) si[k] = static_cast<std::int32_t>(k);
    doc.integer_axis("state", si, "state component number");
    std::vector<double> xs(N * S);
    for (std::size_t i = 0; i < N; ++i)
      for (std::size_t k = 0; k < S; ++k) xs[i * S + k] = b.points[i].orbit.x0[k];
    doc.dataset("state_on_section", {"point", "state"}, xs, "1",
                "state at the section point (watched DOF at a maximum, its velocity zero); SI units "
                "per component (m, rad, m s-1, rad s-1, lag states m s-1)");
  }
  // Bifurcations.
  const std::size_t B = b.bifurcations.size();
  doc.integer_attribute("", "bifurcations", static_cast<std::int64_t>(B));
  if (B > 0) {
    std::vector<std::int32_t> bi(B);
    for (std::size_t k = 0; k < B; ++k) bi[k] = static_cast<std::int32_t>(k + 1);
    doc.integer_axis("bifurcation", bi, "bifurcation number along the branch");
    auto table = [&](const std::string& name, auto&& f, const std::string& units, const std::string& ln) {
      std::vector<double> v(B);
      for (std::size_t k = 0; k < B; ++k) v[k] = f(b.bifurcations[k]);
      doc.dataset(name, {"bifurcation"}, v, units, ln);
    };
    {
      std::vector<std::int64_t> kind(B), after(B);
      for (std::size_t k = 0; k < B; ++k) {
        kind[k] = static_cast<std::int64_t>(b.bifurcations[k].kind);
        after[k] = static_cast<std::int64_t>(b.bifurcations[k].after);
      }
      doc.integer_dataset("bifurcation_kind", {"bifurcation"}, kind, "1",
                          "1 fold, 2 period doubling, 3 torus (Neimark-Sacker), 4 branch point, 5 grazing (branch end)",
                          {{1, 2, 3, 4, 5}, "fold period_doubling torus branch_point grazing"});
      doc.integer_dataset("bifurcation_after_point", {"bifurcation"}, after, "1",
                          "located between this point and the next", {});
    }
    table("bifurcation_parameter", [](const Bifurcation& f) { return f.parameter; }, key_units,
          "located value of the continuation key");
    table("bifurcation_amplitude", [](const Bifurcation& f) { return f.amplitude; },
          dof_units(b.watched_dof), "watched DOF amplitude there (interpolated)");
    table("bifurcation_period", [](const Bifurcation& f) { return f.period; }, "s", "period there (interpolated)");
  }
  doc.commit();
}

nlohmann::json branch_json(const Case& c, const Branch& b, const std::string& output_path) {
  nlohmann::json j = report_header(c, "orbits");
  j["output"] = output_path;
  j["parameter_key"] = b.key;
  j["start"] = to_string(b.start);
  j["start_detail"] = b.start_detail;
  j["hopf_parameter"] = b.hopf_parameter ? nlohmann::json(*b.hopf_parameter) : nlohmann::json();
  j["stop_reason"] = b.stop_reason;
  j["complete"] = complete(b);
  j["watched_dof"] = kDofNames[b.watched_dof];
  j["points"] = nlohmann::json::array();
  for (const auto& p : b.points) {
    const Orbit& o = p.orbit;
    nlohmann::json q;
    q["parameter"] = p.parameter;
    q["airspeed_m_s"] = p.airspeed;
    q["period_s"] = o.period;
    q["frequency_hz"] = o.frequency();
    q["stable"] = o.stable;
    q["largest_multiplier_modulus"] = o.largest_nontrivial;
    q["residual"] = o.residual;
    q["trivial_multiplier_error"] = o.trivial_multiplier_error;
    q["switches_per_period"] = o.switches;
    q["peaks_per_period"] = o.peaks_per_period;
    q["grazing_margin"] = num(o.grazing_margin);
    for (int k = 0; k < c.model.section.dof; ++k) {
      const std::string n = kDofNames[k];
      q["amplitude"][n] = o.dof[k].amplitude;
      q["max"][n] = o.dof[k].max;
      q["min"][n] = o.dof[k].min;
      q["mean"][n] = o.content[k].mean;
      q["harmonics"][n] = o.content[k].harmonics;
    }
    q["multipliers"] = nlohmann::json::array();
    for (const auto& mu : o.multipliers) q["multipliers"].push_back({mu.real(), mu.imag()});
    q["state_on_section"] = o.x0;
    j["points"].push_back(q);
  }
  j["bifurcations"] = nlohmann::json::array();
  for (const auto& f : b.bifurcations)
    j["bifurcations"].push_back({{"kind", to_string(f.kind)}, {"parameter", f.parameter},
                                 {"amplitude", f.amplitude}, {"period_s", f.period}, {"after_point", f.after}});
  return j;
}

std::string branch_text(const Case& c, const Branch& b, const std::string& output_path) {
  // Amplitudes in degrees (pitch, flap), m or semichords (plunge);
  // frequencies in Hz, or w/w_a for a nondimensional case (Presenter).
  const Presenter pr = presenter(c);
  const int w = b.watched_dof;
  const double unit = pr.displacement_value(w, 1.0);
  const char* uname = pr.displacement_unit(w);
  const std::string key_units = case_key_units(b.key);
  std::string t = fmt::format("aerosect orbits: {}\n", c.path);
  if (!c.title.empty()) t += fmt::format("  {}\n", c.title);
  t += fmt::format("  continuation in {}{}; start: {}\n", b.key,
                   key_units.empty() || key_units == "1" ? "" : " (" + key_units + ")", b.start_detail);
  if (b.hopf_parameter) t += fmt::format("  linear flutter (Hopf) point at {:.9g}\n", *b.hopf_parameter);
  std::string key_head = b.key.substr(b.key.rfind('.') + 1);
  if (!key_units.empty() && key_units != "1") key_head += " " + key_units;
  t += fmt::format("\n  {:>16} {:>17} {:>12} {:>10} {:>10} {:>9} {:>9}\n", key_head,
                   fmt::format("{} amp {}", kDofNames[w], uname), pr.frequency_heading(), "stable", "max |mu|",
                   "switches", "residual");
  for (const auto& p : b.points)
    t += fmt::format("  {:>16.8g} {:>17.6g} {:>12.6g} {:>10} {:>10.6f} {:>9} {:>9.2g}\n", p.parameter,
                     p.orbit.dof[w].amplitude * unit, pr.frequency_value(p.orbit.frequency()),
                     p.orbit.stable ? "yes" : "no", p.orbit.largest_nontrivial, p.orbit.switches, p.orbit.residual);
  if (!b.bifurcations.empty()) t += "\n  bifurcations:\n";
  for (const auto& f : b.bifurcations)
    t += fmt::format("    {:<16} at {:.9g}, amplitude {:.6g} {}\n", to_string(f.kind), f.parameter,
                     f.amplitude * unit, uname);
  t += fmt::format("\n  {} points; {}{}\n", b.points.size(), b.cancelled ? "interrupted; " : "", b.stop_reason);
  if (!output_path.empty()) t += fmt::format("  written to {}\n", output_path);
  t += "\n";
  t += kSafetyCaution;
  t += "\n";
  return t;
}

}  // namespace aerosect
