#include "server/api/request_bounds.h"

#include <algorithm>
#include <string>
#include <unordered_map>

#include "absl/strings/str_cat.h"
#include "google/protobuf/reflection.h"
#include "google/protobuf/unknown_field_set.h"
#include "google/protobuf/wire_format.h"

namespace skerry::api {
namespace {

using google::protobuf::FieldDescriptor;
using google::protobuf::Message;
using google::protobuf::Reflection;

constexpr uint64_t kKiB = 1024;
constexpr uint64_t kMiB = 1024 * kKiB;

const std::vector<FieldBound>* BuildTable() {
  return new std::vector<FieldBound>{
      // FleetService
      {"skerry.v1.JoinRequest.name", 0, 256, ""},
      {"skerry.v1.JoinRequest.host", 0, 256, ""},
      {"skerry.v1.JoinRequest.version", 0, 256, ""},
      {"skerry.v1.JoinRequest.sandbox", 0, 256, ""},
      {"skerry.v1.JoinRequest.evaluators", 1000, 256, ""},
      {"skerry.v1.ReportRequest.results", 100000, 0, ""},
      {"skerry.v1.ReportRequest.held_task_ids", 100000, 0, ""},
      {"skerry.v1.HandBackRequest.task_ids", 100000, 0, ""},
      {"skerry.v1.LeaseRequest.worker_secret", 0, 64, ""},
      {"skerry.v1.LeaseRequest.held_centres", 1024, 0, ""},
      {"skerry.v1.ReportRequest.worker_secret", 0, 64, ""},
      {"skerry.v1.HandBackRequest.worker_secret", 0, 64, ""},
      {"skerry.v1.TaskResult.lease_proof", 0, 64, ""},
      {"skerry.v1.TaskResult.error", 0, 1 * kMiB,
       "FleetService.Report: a longer error rejects that result alone"},
      {"skerry.v1.TaskResult.metrics", 0, 0,
       "the engine (common/metric_bounds.h: 32 metrics, names of 64 "
       "bytes): more makes that attempt a failed one, alone"},
      {"skerry.v1.TaskResult.MetricsEntry.key", 0, 0,
       "the engine (common/metric_bounds.h), with TaskResult.metrics"},
      // RunService
      {"skerry.v1.SubmitRunRequest.spec_text", 0, 1 * kMiB, ""},
      {"skerry.v1.SubmitRunRequest.request_id", 0, kMaxRequestIdBytes,
       "RunService.SubmitRun: printable ASCII, no spaces"},
      {"skerry.v1.SubmitRunRequest.spec", 0, 0,
       "the coordinator's budgets (--max-name-bytes, --max-evaluator-bytes, "
       "--max-task-bytes, --max-generation-genes) and ValidateSpec"},
      {"skerry.v1.ForkRunRequest.changes", 0, 1 * kMiB, ""},
      {"skerry.v1.ForkRunRequest.request_id", 0, kMaxRequestIdBytes,
       "RunService.ForkRun: printable ASCII, no spaces"},
      {"skerry.v1.ArchiveRunRequest.confirm_content", 0, 64, ""},
      {"skerry.v1.ArchiveRunRequest.confirm_file_sha256", 0, 64, ""},
      {"skerry.v1.ImportRunsRequest.file", 0, 64 * kMiB,
       "RunService.ImportRuns: larger files import offline "
       "(skerry-coordinator --import)"},
      // StudyService
      {"skerry.v1.SubmitSeriesRequest.spec_text", 0, 1 * kMiB, ""},
      {"skerry.v1.SubmitSeriesRequest.seeds", 100, 0, ""},
      {"skerry.v1.SubmitSeriesRequest.name", 0, 64,
       "StudyService.SubmitSeries: letters, digits, '.', '-', '_'"},
      {"skerry.v1.SubmitSeriesRequest.request_id", 0, kMaxRequestIdBytes,
       "StudyService.SubmitSeries: printable ASCII, no spaces"},
      {"skerry.v1.SubmitSeriesRequest.spec", 0, 0,
       "the coordinator's budgets, as SubmitRunRequest.spec"},
      // AccessService
      {"skerry.v1.CreateTokenRequest.principal", 0, 64, ""},
      {"skerry.v1.CreateTokenRequest.note", 0, 256, ""},
      {"skerry.v1.QueryAuditRequest.principal", 0, 64, ""},
  };
}

const std::unordered_map<const FieldDescriptor*, const FieldBound*>& Index() {
  static const auto* index = [] {
    auto* m = new std::unordered_map<const FieldDescriptor*, const FieldBound*>;
    const auto* pool = google::protobuf::DescriptorPool::generated_pool();
    for (const FieldBound& b : RequestBounds()) {
      // A row naming no field is caught by request_bounds_test.
      if (const FieldDescriptor* f = pool->FindFieldByName(b.field)) {
        (*m)[f] = &b;
      }
    }
    return m;
  }();
  return *index;
}

absl::Status TooBig(const std::string& path, uint64_t limit, uint64_t got,
                    const char* unit) {
  return absl::InvalidArgumentError(
      absl::StrCat(path, ": at most ", limit, " ", unit, ", got ", got,
                   " (docs/protocol.md, Bounds)"));
}

absl::Status Walk(const Message& m, const std::string& prefix) {
  const Reflection* r = m.GetReflection();
  const uint64_t unknown =
      google::protobuf::internal::WireFormat::ComputeUnknownFieldsSize(
          r->GetUnknownFields(m));
  if (unknown > kMaxUnknownBytes) {
    return TooBig(prefix.empty() ? "unknown fields"
                                 : absl::StrCat(prefix, ": unknown fields"),
                  kMaxUnknownBytes, unknown, "bytes");
  }
  std::vector<const FieldDescriptor*> fields;
  r->ListFields(m, &fields);
  for (const FieldDescriptor* f : fields) {
    const FieldBound* bound = FindBound(f);
    if (bound != nullptr && bound->elsewhere[0] != '\0') continue;
    const uint64_t max_bytes =
        bound != nullptr ? bound->max_bytes : kDefaultBytes;
    const std::string path =
        prefix.empty() ? f->name() : absl::StrCat(prefix, ".", f->name());
    const bool text = f->type() == FieldDescriptor::TYPE_STRING ||
                      f->type() == FieldDescriptor::TYPE_BYTES;
    const bool nested = f->cpp_type() == FieldDescriptor::CPPTYPE_MESSAGE;
    if (f->is_repeated()) {
      const int n = r->FieldSize(m, f);
      const uint64_t max_entries =
          bound != nullptr ? bound->max_entries : kDefaultEntries;
      if (static_cast<uint64_t>(n) > max_entries) {
        return TooBig(path, max_entries, static_cast<uint64_t>(n), "entries");
      }
      for (int i = 0; i < n && (text || nested); ++i) {
        const std::string item = absl::StrCat(path, "[", i, "]");
        if (text) {
          std::string scratch;
          const std::string& v =
              r->GetRepeatedStringReference(m, f, i, &scratch);
          if (v.size() > max_bytes) {
            return TooBig(item, max_bytes, v.size(), "bytes");
          }
        } else if (absl::Status s = Walk(r->GetRepeatedMessage(m, f, i), item);
                   !s.ok()) {
          return s;
        }
      }
    } else if (text) {
      std::string scratch;
      const std::string& v = r->GetStringReference(m, f, &scratch);
      if (v.size() > max_bytes)
        return TooBig(path, max_bytes, v.size(), "bytes");
    } else if (nested) {
      if (absl::Status s = Walk(r->GetMessage(m, f), path); !s.ok()) return s;
    }
  }
  return absl::OkStatus();
}

}  // namespace

const std::vector<FieldBound>& RequestBounds() {
  static const std::vector<FieldBound>* table = BuildTable();
  return *table;
}

const FieldBound* FindBound(const FieldDescriptor* field) {
  const auto& index = Index();
  auto it = index.find(field);
  return it == index.end() ? nullptr : it->second;
}

absl::Status CheckRequestBounds(const Message& request) {
  return Walk(request, "");
}

absl::Status CheckRequestId(const std::string& id) {
  if (id.size() > kMaxRequestIdBytes ||
      !std::all_of(id.begin(), id.end(),
                   [](char c) { return c > ' ' && c < 127; })) {
    return absl::InvalidArgumentError(
        absl::StrCat("request_id: up to ", kMaxRequestIdBytes,
                     " printable ASCII characters, no spaces"));
  }
  return absl::OkStatus();
}

}  // namespace skerry::api
