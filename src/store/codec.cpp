// Encodings of docs/ledger-format.md: the keys, the format version, the id index value and the
// ranges of record keys. A stream's configuration, head and running tests are in codec_stream.cpp,
// the chain entries in codec_chain.cpp (store/codec_internal.hpp: what they share).
#include "store/codec.hpp"

#include "core/bytes.hpp"
#include "store/codec_internal.hpp"

namespace alphaledger::store {
namespace {

using bytes::put_u32;
using bytes::put_u64;
using codec_detail::Reader;

std::string hex16(std::uint64_t v) {
  static constexpr char kHex[] = "0123456789abcdef";
  std::string out(16, '0');
  for (int i = 15; i >= 0; --i, v >>= 4) out[static_cast<std::size_t>(i)] = kHex[v & 15];
  return out;
}

}  // namespace

std::string config_key(std::string_view stream) { return "c/" + std::string(stream); }
std::string head_key(std::string_view stream) { return "h/" + std::string(stream); }
std::string record_prefix(std::string_view stream) { return "r/" + std::string(stream) + "/"; }
// The keys written for every decision are built in one allocation each.
std::string record_key(std::string_view stream, std::uint64_t step) {
  std::string out;
  out.reserve(stream.size() + 3 + 16);
  out.append("r/").append(stream).push_back('/');
  out.append(16, '0');
  set_record_key_step(out, step);
  return out;
}
void set_record_key_step(std::string& key, std::uint64_t step) {
  static constexpr char kHex[] = "0123456789abcdef";
  char* end = key.data() + key.size();
  for (int i = 1; i <= 16; ++i, step >>= 4) end[-i] = kHex[step & 15];
}
std::string look_key(std::string_view stream, std::string_view id) {
  return "l/" + std::string(stream) + "/" + std::string(id);
}
std::string index_prefix(std::string_view stream) { return "i/" + std::string(stream) + "/"; }
std::string running_prefix(std::string_view stream) { return "t/" + std::string(stream) + "/"; }
std::string running_key(std::string_view stream, std::uint64_t launch) {
  std::string out;
  out.reserve(stream.size() + 3 + 16);
  out.append("t/").append(stream).push_back('/');
  out.append(16, '0');
  set_record_key_step(out, launch);
  return out;
}
std::string index_key(std::string_view stream, std::string_view id) {
  std::string out;
  assign_index_key(out, stream, id);
  return out;
}
void assign_index_key(std::string& out, std::string_view stream, std::string_view id) {
  out.clear();
  out.reserve(stream.size() + 3 + id.size());
  out.append("i/").append(stream).push_back('/');
  out.append(id);
}

std::string encode_format_version(std::uint32_t version) {
  std::string out;
  put_u32(out, version);
  return out;
}

Result<std::uint32_t> decode_format_version(std::string_view bytes) {
  Reader r{{bytes}};
  const auto v = r.u32();
  if (!r.ok || !r.in.empty())
    return corruption("the format version key holds " + std::to_string(bytes.size()) +
                         " bytes, expected 4");
  return v;
}

std::string encode_step(std::uint64_t step) {
  std::string out;
  put_u64(out, step);
  return out;
}

Result<std::uint64_t> decode_step(std::string_view bytes) {
  Reader r{{bytes}};
  const auto v = r.u64();
  if (!r.ok || !r.in.empty())
    return corruption("test id index entry holds " + std::to_string(bytes.size()) + " bytes, expected 8");
  return v;
}

std::vector<std::string> record_range_prefixes(std::string_view stream, std::uint64_t lo, std::uint64_t hi) {
  std::vector<std::string> out;
  if (lo == 0 || lo > hi) return out;
  const std::string base = record_prefix(stream);
  while (true) {
    // The widest block of 16^k steps that starts at lo and ends at or before hi: its keys are
    // exactly those sharing the first 16 - k hex digits of lo.
    int k = 0;
    while (k < 15) {
      const std::uint64_t size = std::uint64_t{1} << (4 * (k + 1));
      if (lo % size != 0 || hi - lo < size - 1) break;
      ++k;
    }
    out.push_back(base + hex16(lo).substr(0, static_cast<std::size_t>(16 - k)));
    const std::uint64_t size = std::uint64_t{1} << (4 * k);
    if (hi - lo < size) break;
    lo += size;
  }
  return out;
}

}  // namespace alphaledger::store
