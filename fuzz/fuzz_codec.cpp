// The ledger's value codec (src/store/codec.hpp): decoding any bytes never crashes, and whatever
// decodes encodes back to a value that decodes to the same fields.
#include <cstring>

#include "fuzz_support.hpp"
#include "store/codec.hpp"

using namespace alphaledger;
using namespace alphaledger::store;

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string_view bytes = fuzz::as_text(data, size);
  (void)decode_format_version(bytes);
  (void)decode_step(bytes);
  (void)recompute_record_hash(bytes);
  if (auto c = decode_config(bytes)) {
    auto again = decode_config(encode_config(*c));
    fuzz::require(again.ok() && *again == *c, "a decoded config that does not survive encode + decode");
  }
  if (auto h = decode_head(bytes)) {
    auto again = decode_head(encode_head(*h));
    fuzz::require(again.ok() && *again == *h, "a decoded head that does not survive encode + decode");
  }
  if (auto r = decode_record(bytes)) {
    auto again = decode_record(encode_record(r->record, r->prev_hash));
    fuzz::require(again.ok(), "a decoded record that does not decode after encoding");
    const DecisionRecord& a = r->record;
    const DecisionRecord& b = again->record;
    fuzz::require(a.step == b.step && a.id == b.id && std::memcmp(&a.p_value, &b.p_value, 8) == 0 &&
                      std::memcmp(&a.level, &b.level, 8) == 0 && a.rejected == b.rejected &&
                      std::memcmp(&a.wealth, &b.wealth, 8) == 0 && a.decided_at_ms == b.decided_at_ms,
                  "a decoded record that does not survive encode + decode");
  }
  return 0;
}
