// The CSV form of replay's decisions, shared by `replay` and the Python binding
// (include/alphaledger/replay.hpp, docs/formats.md).
#include <charconv>

#include "alphaledger/replay.hpp"
#include "alphaledger/text.hpp"

namespace alphaledger {

namespace {

void append_count(std::string& out, std::uint64_t v) {
  char buf[24];
  out.append(buf, std::to_chars(buf, buf + sizeof buf, v).ptr);
}

}  // namespace

std::string replay_csv_header(const CompactLog& log) {
  std::string out = log.has_launch ? "rule,step,launch,id,p_value," : "rule,step,id,p_value,";
  out += log.has_e_values ? "e_value,level,rejected,wealth\n" : "level,rejected,wealth\n";
  return out;
}

void append_replay_csv_row(std::string& out, std::string_view rule, const CompactLog& log, std::size_t k,
                           const Decision& d) {
  const CompactRecord& r = log.records[k];
  out += rule;
  out += ',';
  append_count(out, d.step);
  out += ',';
  if (log.has_launch) {
    if (d.launch > 0) append_count(out, d.launch);  // empty for bh / storey-bh
    out += ',';
  }
  const std::string_view id = log.id(r);
  if (id.find_first_of(",\"\n\r") == std::string_view::npos)
    out += id;
  else
    out += csv_field(id);
  out += ',';
  if (log.has_p_values) append_number_text(out, r.p_value);
  out += ',';
  if (log.has_e_values) {
    append_number_text(out, r.e_value);
    out += ',';
  }
  append_number_text(out, d.level);
  out += d.rejected ? ",1," : ",0,";
  if (d.wealth) append_number_text(out, *d.wealth);
  out += '\n';
}

}  // namespace alphaledger
