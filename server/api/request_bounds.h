// The bound on every string, bytes and repeated field of every request the
// coordinator serves (docs/protocol.md, "Bounds", is the user's table).
//
// One table, keyed by the field's full name, says how many bytes a string or
// bytes field may hold and how many entries a repeated field may have.
// CheckRequestBounds walks a request against it before its handler runs
// (AccessControl::Examine calls it for every call, so the refusal is the
// call's verdict). A few fields are bounded by their handler instead, and
// their row says by what: a run spec by the coordinator's budgets
// (common/spec.h SpecBudgets, checked by RunService.SubmitRun), and a result's
// error text by FleetService.Report, which rejects that result alone. A field
// without a row gets kDefaultBytes / kDefaultEntries; the tests require a
// row for every field, so the table and the protos cannot drift apart.
//
// Unknown fields (a newer client's) are allowed up to kMaxUnknownBytes per
// request.
//
// Thread safety: the table is built once and never changes.
#ifndef SKERRY_SERVER_API_REQUEST_BOUNDS_H_
#define SKERRY_SERVER_API_REQUEST_BOUNDS_H_

#include <cstddef>
#include <cstdint>
#include <string>
#include <vector>

#include "absl/status/status.h"
#include "google/protobuf/descriptor.h"
#include "google/protobuf/message.h"

namespace skerry::api {

struct FieldBound {
  const char* field;     // full name: "skerry.v1.JoinRequest.name"
  uint64_t max_entries;  // repeated fields; 0 for singular ones
  uint64_t max_bytes;    // strings and bytes (each entry of a repeated one)
  // Non-empty: bounded by a handler, not by this walk; says by what.
  const char* elsewhere;
};

inline constexpr uint64_t kDefaultBytes = 256;
inline constexpr uint64_t kDefaultEntries = 1000;
inline constexpr uint64_t kMaxUnknownBytes = 64 << 10;

// Every row, in the order docs/protocol.md lists them.
const std::vector<FieldBound>& RequestBounds();
// The row of a field, or nullptr.
const FieldBound* FindBound(const google::protobuf::FieldDescriptor* field);

// InvalidArgument naming the first field over its bound ("results[3].error:
// at most N bytes, got M"); quotes no content.
absl::Status CheckRequestBounds(const google::protobuf::Message& request);

// A client-chosen request id (SubmitRun, ForkRun, SubmitSeries): empty, or up
// to kMaxRequestIdBytes printable ASCII characters without spaces; otherwise
// INVALID_ARGUMENT naming the field.
inline constexpr size_t kMaxRequestIdBytes = 128;
absl::Status CheckRequestId(const std::string& id);

}  // namespace skerry::api

#endif  // SKERRY_SERVER_API_REQUEST_BOUNDS_H_
