// What the store keeps of a seed series (schema version 9): its name, owner
// and the runs made for it, one per seed. The engine and the API fill and read
// it; series_store.{h,cc} write and read the rows.
//
// Thread safety: plain values.
#ifndef SKERRY_SERVER_STORE_SERIES_RECORDS_H_
#define SKERRY_SERVER_STORE_SERIES_RECORDS_H_

#include <cstdint>
#include <string>
#include <utility>
#include <vector>

namespace skerry::store {

struct SeriesRecord {
  int64_t id = 0;
  std::string name;
  std::string owner;
  int64_t created_ms = 0;
  std::string request_id;  // empty: none given
  // (run id, seed), in the order the seeds were given.
  std::vector<std::pair<int64_t, uint64_t>> members;
};

}  // namespace skerry::store

#endif  // SKERRY_SERVER_STORE_SERIES_RECORDS_H_
