// libpq, loaded when a PostgreSQL ledger is first opened rather than when the program starts.
// Internal to the store.
//
// Linking libpq brings 22 shared libraries (TLS, Kerberos, LDAP, ...) into every process: about
// 390 page faults and 14 ms of CPU at each start on our machine, paid by every command even on a
// folder ledger (docs/benchmarks.md "libpq loaded on demand"). So the store does not link it: the
// first open of a postgresql:// location dlopen()s libpq.so.5 and looks up the functions below, and
// the PostgreSQL files call them through pq(). The types and constants still come from libpq-fe.h.
//
// Thread-safety: load_libpq() may be called from many threads (it loads once); pq() is then a
// read-only table.
#pragma once

#include <libpq-fe.h>

#include "alphaledger/result.hpp"

namespace alphaledger::store::pg {

// One member per libpq function the store calls, named as in libpq.
struct LibPq {
  decltype(&::PQclear) PQclear;
  decltype(&::PQconnectdbParams) PQconnectdbParams;
  decltype(&::PQconninfoFree) PQconninfoFree;
  decltype(&::PQconninfoParse) PQconninfoParse;
  decltype(&::PQerrorMessage) PQerrorMessage;
  decltype(&::PQexec) PQexec;
  decltype(&::PQexecParams) PQexecParams;
  decltype(&::PQfinish) PQfinish;
  decltype(&::PQfreemem) PQfreemem;
  decltype(&::PQgetisnull) PQgetisnull;
  decltype(&::PQgetlength) PQgetlength;
  decltype(&::PQgetvalue) PQgetvalue;
  decltype(&::PQntuples) PQntuples;
  decltype(&::PQresultErrorField) PQresultErrorField;
  decltype(&::PQresultErrorMessage) PQresultErrorMessage;
  decltype(&::PQresultStatus) PQresultStatus;
  decltype(&::PQsetNoticeProcessor) PQsetNoticeProcessor;
  decltype(&::PQstatus) PQstatus;
  decltype(&::PQtransactionStatus) PQtransactionStatus;
};

// Loads libpq (once per process): the table, or kIOError saying that the PostgreSQL backend needs
// libpq.so.5 (Debian package libpq5) and what the loader said, starting with `what`.
Result<const LibPq*> load_libpq(const std::string& what);

// The loaded table. REQUIRES: load_libpq() succeeded earlier in this process (every PostgreSQL
// store is made after it).
const LibPq& pq();

}  // namespace alphaledger::store::pg
