// libpq loaded on demand (postgres_lib.hpp).
#include "store/postgres_lib.hpp"

#include <dlfcn.h>

#include <mutex>
#include <string>

namespace alphaledger::store::pg {

namespace {

LibPq g_table{};
const char* g_missing = nullptr;  // the first function not found, or the loader's message
std::string g_loader_message;
std::once_flag g_once;

template <typename F>
void find(void* lib, F& slot, const char* name) {
  if (g_missing) return;
  slot = reinterpret_cast<F>(::dlsym(lib, name));
  if (!slot) g_missing = name;
}

void load() {
  // The soname of libpq since PostgreSQL 8.2 (the ABI is kept stable under it).
  void* lib = ::dlopen("libpq.so.5", RTLD_NOW | RTLD_LOCAL);
  if (!lib) {
    const char* why = ::dlerror();
    g_loader_message = why ? why : "dlopen failed";
    g_missing = g_loader_message.c_str();
    return;
  }
#define ALPHALEDGER_FIND(name) find(lib, g_table.name, #name)
  ALPHALEDGER_FIND(PQclear);
  ALPHALEDGER_FIND(PQconnectdbParams);
  ALPHALEDGER_FIND(PQconninfoFree);
  ALPHALEDGER_FIND(PQconninfoParse);
  ALPHALEDGER_FIND(PQerrorMessage);
  ALPHALEDGER_FIND(PQexec);
  ALPHALEDGER_FIND(PQexecParams);
  ALPHALEDGER_FIND(PQfinish);
  ALPHALEDGER_FIND(PQfreemem);
  ALPHALEDGER_FIND(PQgetisnull);
  ALPHALEDGER_FIND(PQgetlength);
  ALPHALEDGER_FIND(PQgetvalue);
  ALPHALEDGER_FIND(PQntuples);
  ALPHALEDGER_FIND(PQresultErrorField);
  ALPHALEDGER_FIND(PQresultErrorMessage);
  ALPHALEDGER_FIND(PQresultStatus);
  ALPHALEDGER_FIND(PQsetNoticeProcessor);
  ALPHALEDGER_FIND(PQstatus);
  ALPHALEDGER_FIND(PQtransactionStatus);
#undef ALPHALEDGER_FIND
  if (g_missing) {
    g_loader_message = std::string("libpq.so.5 has no function ") + g_missing;
    g_missing = g_loader_message.c_str();
  }
  // The library stays loaded for the life of the process (its connections may outlive any caller).
}

}  // namespace

Result<const LibPq*> load_libpq(const std::string& what) {
  std::call_once(g_once, load);
  if (g_missing) {
    return io_error(what + ": the PostgreSQL backend needs libpq.so.5, the PostgreSQL client library " +
                    "(Debian package libpq5), and it cannot be loaded: " + g_loader_message);
  }
  return &g_table;
}

const LibPq& pq() { return g_table; }

}  // namespace alphaledger::store::pg
