// Times as the ledger prints them (alphaledger/text.hpp format_timestamp), checked against GNU
// coreutils `date -u -d @SECONDS +%FT%T.%3N` (run on Debian 12 when this test was written).
#include <doctest/doctest.h>

#include <cstdint>

#include "alphaledger/text.hpp"

using alphaledger::format_timestamp;
using alphaledger::parse_time_text;

TEST_CASE("TextTime: format_timestamp prints ISO 8601 UTC with milliseconds, as GNU date does") {
  CHECK(format_timestamp(0) == "1970-01-01T00:00:00.000Z");
  CHECK(format_timestamp(1700000000000) == "2023-11-14T22:13:20.000Z");  // date -u -d @1700000000
  CHECK(format_timestamp(951782400123) == "2000-02-29T00:00:00.123Z");   // a leap day
  CHECK(format_timestamp(-1) == "1969-12-31T23:59:59.999Z");             // date -u -d @-0.001
}

// The digits are written without printf for years 0000-9999 and with it outside them; both sides
// of each edge, against GNU date and Python's datetime (Debian 12's python3,
// `(datetime(1970,1,1) + timedelta(milliseconds=MS)).isoformat(timespec="milliseconds")`).
TEST_CASE("TextTime: format_timestamp at the edges of the years it writes digit by digit") {
  CHECK(format_timestamp(253402300799999) == "9999-12-31T23:59:59.999Z");  // date -u -d @253402300799.999
  CHECK(format_timestamp(-62167219200000) == "0000-01-01T00:00:00.000Z");  // date -u -d @-62167219200
  CHECK(format_timestamp(1234567890500) == "2009-02-13T23:31:30.500Z");    // date -u -d @1234567890.5
  CHECK(format_timestamp(4102444800000) == "2100-01-01T00:00:00.000Z");    // not a leap year; Python
  CHECK(format_timestamp(1709164800042) == "2024-02-29T00:00:00.042Z");    // Python
  CHECK(format_timestamp(951868799999) == "2000-02-29T23:59:59.999Z");     // Python
  // Outside 0000-9999 the year keeps printf's "%04d": more digits, or a minus sign.
  CHECK(format_timestamp(253402300800000) == "10000-01-01T00:00:00.000Z");  // date -u -d @253402300800
  CHECK(format_timestamp(-62167219200001) == "-001-12-31T23:59:59.999Z");
}

TEST_CASE("TextTime: a printed time reads back to the same second count") {
  for (const std::int64_t ms : {std::int64_t{0}, std::int64_t{1700000000000}, std::int64_t{951782400123}}) {
    CAPTURE(ms);
    const auto back = parse_time_text(format_timestamp(ms));
    REQUIRE(back.ok());
    CHECK(*back * 1000 == doctest::Approx(static_cast<double>(ms)).epsilon(1e-15));
  }
}
