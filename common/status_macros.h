// Early-return helpers for absl::Status and absl::StatusOr.
//
//   SKERRY_RETURN_IF_ERROR(store->Commit());
//   SKERRY_ASSIGN_OR_RETURN(auto run, store->runs().GetRun(id));
#ifndef SKERRY_COMMON_STATUS_MACROS_H_
#define SKERRY_COMMON_STATUS_MACROS_H_

#include "absl/status/status.h"
#include "absl/status/statusor.h"

#define SKERRY_RETURN_IF_ERROR(expr)         \
  do {                                       \
    const absl::Status skerry_st_ = (expr);  \
    if (!skerry_st_.ok()) return skerry_st_; \
  } while (0)

#define SKERRY_STATUS_CONCAT_INNER_(a, b) a##b
#define SKERRY_STATUS_CONCAT_(a, b) SKERRY_STATUS_CONCAT_INNER_(a, b)

// lhs may declare a variable: SKERRY_ASSIGN_OR_RETURN(auto x, F());
#define SKERRY_ASSIGN_OR_RETURN(lhs, expr)                                   \
  SKERRY_ASSIGN_OR_RETURN_IMPL_(SKERRY_STATUS_CONCAT_(skerry_so_, __LINE__), \
                                lhs, expr)
#define SKERRY_ASSIGN_OR_RETURN_IMPL_(tmp, lhs, expr) \
  auto tmp = (expr);                                  \
  if (!tmp.ok()) return tmp.status();                 \
  lhs = std::move(*tmp)

#endif  // SKERRY_COMMON_STATUS_MACROS_H_
