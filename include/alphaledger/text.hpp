// Small text rules every layer shares, kept once here in the core: how a number is written and
// read, how a test id and a stream name are checked, how a value is cut down for a message, and
// how a CSV field is quoted. Every input path (CSV, JSON Lines, pipe, HTTP, command line) and every
// output (CSV, JSON, messages) goes through these, so a value has one meaning everywhere.
//
// Errors are kInvalidArgument and quote at most excerpt() of the value.
// Thread-safety: free functions, no shared state.
//
// Example:
//   std::string s = alphaledger::format_number(0.1);           // "0.1"
//   auto v = alphaledger::parse_number_text(" 1e-8 ", "p");     // 1e-08
//   auto bad = alphaledger::validate_test_id(" x");             // error: white space at an end
#pragma once

#include <cstddef>
#include <cstdint>
#include <optional>
#include <string>
#include <string_view>

#include "alphaledger/result.hpp"

namespace alphaledger {

// ---- Writing numbers ---------------------------------------------------------------------------

// The shortest text that reads back to the identical double (std::to_chars without a precision),
// as every CSV and JSON output writes numbers: 0.1 -> "0.1", 1e-8 -> "1e-08". NaN gives "" (an
// empty CSV cell); infinities give "inf" / "-inf".
std::string format_number(double v);
// format_number(v) appended to `out`, without a temporary string (for long outputs).
void append_number_text(std::string& out, double v);

// For people: `digits` significant digits (std::chars_format::general). NaN gives "-".
std::string format_rounded(double v, int digits = 4);

// A CSV field, quoted when it holds a comma, a quote or a line break (RFC 4180); quotes inside are
// doubled. Other text is returned as it is.
std::string csv_field(std::string_view s);

// ---- Reading numbers ---------------------------------------------------------------------------

// The blanks around an input value removed: spaces and tabs at both ends, and carriage returns at
// the end (what is left of a CRLF line end). A carriage return at the start is kept: no line end
// leaves one there, so it is part of the value and gets reported.
std::string_view trim(std::string_view s);

// A number written as text: a decimal such as 0.01, .5, 1e-8 or -3 (surrounding spaces and tabs
// are ignored, see trim()); no '+' sign, hex, inf or nan. A number too large for a double, or one
// that is not zero but too small to be held (below about 4.9e-324), is refused, never rounded to
// infinity or 0. Negative zero is read as 0. `field` names the value in messages.
Result<double> parse_number_text(std::string_view text, std::string_view field);
// A p-value written as text (CSV cell, `decide --p`): parse_number_text, then within [0, 1].
Result<double> parse_p_value_text(std::string_view text);
// A time written as text: an ISO 8601 date (2025-03-14) or date-time (2025-03-14T09:30:00Z, with
// optional seconds, fraction and offset), as seconds since 1970-01-01T00:00:00Z; or a plain number
// (parse_number_text), taken as it is.
Result<double> parse_time_text(std::string_view text);
// Milliseconds since 1970-01-01T00:00:00Z as ISO 8601 UTC with milliseconds, e.g. 1700000000000
// -> "2023-11-14T22:13:20.000Z": how every time the ledger keeps (decided_at, created_at) is printed.
std::string format_timestamp(std::int64_t ms);

// The whole of `text` as a finite double in std::from_chars' syntax (no blanks, no '+'; "inf" and
// "nan" are refused), or nothing. For option values whose own messages say what is accepted.
std::optional<double> read_finite_number(std::string_view text);
// The whole of `text` as an unsigned 64-bit integer of decimal digits (no blanks, no sign), or
// nothing (also when it does not fit).
std::optional<std::uint64_t> read_whole_number(std::string_view text);

// ---- Names and ids -----------------------------------------------------------------------------

// The longest test id, in bytes.
inline constexpr std::size_t kMaxTestIdBytes = 256;
// A test id: 1..256 bytes of valid UTF-8, without control characters (C0, DEL, C1) and without
// white space at either end. One rule for every input: CSV, JSON Lines, pipe, HTTP,
// `decide --id`, the ledger.
Status validate_test_id(std::string_view id);

// The longest stream name, in bytes.
inline constexpr std::size_t kMaxStreamName = 128;
// A stream name: 1..128 bytes of ASCII letters, digits, '-', '_' and '.', and not "." or "..".
// None of these is '/', the ledger's key separator, so a name cannot reach another stream's keys.
Status validate_stream_name(std::string_view name);

// ---- Messages ----------------------------------------------------------------------------------

// A value as it may appear in a message: at most `max_bytes` of it (then "...(N bytes)"), with
// control characters and bytes that are not valid UTF-8 written as \xHH. Every message that
// echoes input goes through this, so a megabyte field never becomes a megabyte message.
std::string excerpt(std::string_view value, std::size_t max_bytes = 60);

// The length of the strict UTF-8 sequence at s[i] (no overlong forms, no surrogates, at most
// U+10FFFF), with its code point in `cp`; 0 when the bytes there are not valid UTF-8.
// REQUIRES: i < s.size()
std::size_t utf8_length(std::string_view s, std::size_t i, char32_t& cp);

}  // namespace alphaledger
