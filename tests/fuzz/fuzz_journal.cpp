// libFuzzer target over the sweep journal reader: the bytes of each input
// are written to a scratch file and opened as the journal of a sweep
// (io/journal.cpp: head, line checks, damaged and cut lines), and its
// records are read back as that sweep's points (points_from_journal,
// point_from_record in analysis/sweep.cpp), as `aerosect sweep` does on
// resume.
// The sweep is the one the journal's own head names when its identity reads
// as a request (request_from_json, then the case text through parse_case for
// the number of DOFs): its identity is the program's form of that request
// (request_json) plus the head's recorded-gust digests, which the program
// takes from the gust files. A head that does not read as a request is
// opened as the journal of a fixed other sweep (refused unless the head is
// that sweep's).
// InputError is the expected answer to bad input; any other exception, a
// crash, a sanitizer report, a message longer than one screen or a point
// that breaks the reader's promises (indices on the request's axes, values
// the request's, a direction it runs, a watched DOF of the case, each point
// once, bounded state) is a finding.
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <fstream>
#include <optional>
#include <set>
#include <string>
#include <tuple>

#include <nlohmann/json.hpp>

#include "aerosect/analysis/sweep.hpp"
#include "aerosect/error.hpp"
#include "aerosect/io/case.hpp"
#include "aerosect/io/journal.hpp"
#include "fuzz_check.hpp"

namespace {

const std::string& scratch_path() {
  static const std::string p = aerosect::fuzz::scratch_file(".h5.journal");
  return p;
}

struct Sweep {
  aerosect::SweepRequest request;
  int ndof = 2;
  nlohmann::json identity;
};

// The sweep the head line names, when its identity reads as a request whose
// case reads; nullopt otherwise.
std::optional<Sweep> sweep_of_head(const std::string& bytes) {
  const nlohmann::json head = nlohmann::json::parse(bytes.substr(0, bytes.find('\n')), nullptr, false);
  if (head.is_discarded() || !head.is_object() || !head.contains("identity")) return std::nullopt;
  const nlohmann::json& id = head["identity"];
  if (!id.is_object()) return std::nullopt;
  try {
    Sweep s;
    s.request = aerosect::request_from_json(id, {"fuzz head", 1, 0});
    const aerosect::SweepRequest& r = s.request;
    s.ndof = aerosect::parse_case(r.case_text, r.case_path, r.overrides).model.section.dof;
    s.identity = aerosect::request_json(r);
    if (id.contains("recorded_gusts")) s.identity["recorded_gusts"] = id["recorded_gusts"];
    return s;
  } catch (const aerosect::InputError& e) {
    aerosect::fuzz::check_one_screen(e);
    return std::nullopt;
  }
}

void check_points(const std::vector<aerosect::SweepPoint>& points, const Sweep& s,
                  const aerosect::SweepTables& t) {
  const aerosect::SweepOptions& o = s.request.options;
  std::set<std::tuple<int, int, int>> seen;
  for (const auto& p : points) {
    const bool direction_run = (p.direction == 0 && o.up) || (p.direction == 1 && o.down);
    if (!direction_run || p.i < 0 || static_cast<std::size_t>(p.i) >= t.n1 || p.j < 0 ||
        static_cast<std::size_t>(p.j) >= t.n2)
      std::abort();
    if (p.value1 != o.axes[0].values[static_cast<std::size_t>(p.i)]) std::abort();
    if (o.axes.size() > 1 && p.value2 != o.axes[1].values[static_cast<std::size_t>(p.j)]) std::abort();
    if (p.lco.watched_dof < 0 || p.lco.watched_dof >= s.ndof) std::abort();
    using aerosect::ResponseClass;
    const ResponseClass cls = p.lco.response;
    if (cls != ResponseClass::kDecayed && cls != ResponseClass::kPeriodic && cls != ResponseClass::kNonPeriodic &&
        cls != ResponseClass::kDivergent && cls != ResponseClass::kUnsettled)
      std::abort();
    if (p.final_state.size() > aerosect::kMaxStateSize || p.final_regions.size() > static_cast<std::size_t>(s.ndof))
      std::abort();
    if (p.cycle.samples != 0 && static_cast<std::size_t>(p.cycle.samples) != t.samples) std::abort();
    if (!seen.insert({p.direction, p.i, p.j}).second) std::abort();
  }
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string bytes(reinterpret_cast<const char*>(data), size);
  const std::string& path = scratch_path();
  {
    std::ofstream out(path, std::ios::binary | std::ios::trunc);
    out.write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
  }
  try {
    const std::optional<Sweep> s = sweep_of_head(bytes);
    if (s) {
      aerosect::JournalHead head = aerosect::sweep_journal_head(s->request);
      head.identity = s->identity;
      const aerosect::Journal journal(path, head);
      const aerosect::SweepTables t = aerosect::sweep_tables(s->request, s->ndof);
      check_points(aerosect::points_from_journal(journal, s->request, t), *s, t);
    } else {
      aerosect::JournalHead head;
      head.kind = "sweep";
      head.format = aerosect::kSweepJournalFormat;
      head.identity = {{"fuzz", "not the journal's sweep"}};
      const aerosect::Journal journal(path, head);
    }
  } catch (const aerosect::InputError& e) {
    aerosect::fuzz::check_one_screen(e);
  }
  return 0;
}
