// A gmock of RunService::StubInterface for CLI tests (grpc only generates one
// with a plugin flag), and scripted stream readers for WatchRun and FollowRun.
//
// Invariant: only the sync methods the CLI calls are mocked; the async ones
// return nullptr and must not be called.
// Thread safety: as gmock; use from the test's thread.
#ifndef SKERRY_TESTS_UNIT_CLI_MOCK_RUN_SERVICE_H_
#define SKERRY_TESTS_UNIT_CLI_MOCK_RUN_SERVICE_H_

#include <cstddef>
#include <utility>
#include <vector>

#include "gmock/gmock.h"
#include "grpcpp/support/sync_stream.h"
#include "skerry/v1/runs.grpc.pb.h"

namespace skerry::cli::testing {

// Yields `updates` in order, then finishes with `status`.
class ScriptedReader
    : public grpc::ClientReaderInterface<skerry::v1::RunSummary> {
 public:
  ScriptedReader(std::vector<skerry::v1::RunSummary> updates,
                 grpc::Status status)
      : updates_(std::move(updates)), status_(std::move(status)) {}
  bool Read(skerry::v1::RunSummary* message) override {
    if (next_ >= updates_.size()) return false;
    *message = updates_[next_++];
    return true;
  }
  grpc::Status Finish() override { return status_; }
  bool NextMessageSize(uint32_t* size) override {
    *size = 1 << 20;
    return next_ < updates_.size();
  }
  void WaitForInitialMetadata() override {}

 private:
  std::vector<skerry::v1::RunSummary> updates_;
  grpc::Status status_;
  size_t next_ = 0;
};

// FollowRun's client side over a ScriptedReader: the requests written are
// kept (asks) and the summaries read come from the script.
class ScriptedFollower
    : public grpc::ClientReaderWriterInterface<skerry::v1::FollowRunRequest,
                                               skerry::v1::RunSummary> {
 public:
  // `asks`, when given, receives every request written (it outlives the
  // stream, which the client deletes).
  ScriptedFollower(std::vector<skerry::v1::RunSummary> updates,
                   grpc::Status status,
                   std::vector<skerry::v1::FollowRunRequest>* asks = nullptr)
      : reader_(std::move(updates), std::move(status)), asks_(asks) {}
  bool Read(skerry::v1::RunSummary* message) override {
    return reader_.Read(message);
  }
  bool NextMessageSize(uint32_t* size) override {
    return reader_.NextMessageSize(size);
  }
  bool Write(const skerry::v1::FollowRunRequest& request,
             grpc::WriteOptions) override {
    if (asks_ != nullptr) asks_->push_back(request);
    return true;
  }
  bool WritesDone() override { return true; }
  grpc::Status Finish() override { return reader_.Finish(); }
  void WaitForInitialMetadata() override {}

 private:
  ScriptedReader reader_;
  std::vector<skerry::v1::FollowRunRequest>* const asks_;
};

#define SKERRY_NO_ASYNC_UNARY(Method, Request, Response)                   \
  grpc::ClientAsyncResponseReaderInterface<skerry::v1::Response>*          \
      Async##Method##Raw(grpc::ClientContext*, const skerry::v1::Request&, \
                         grpc::CompletionQueue*) override {                \
    return nullptr;                                                        \
  }                                                                        \
  grpc::ClientAsyncResponseReaderInterface<skerry::v1::Response>*          \
      PrepareAsync##Method##Raw(grpc::ClientContext*,                      \
                                const skerry::v1::Request&,                \
                                grpc::CompletionQueue*) override {         \
    return nullptr;                                                        \
  }

class MockRunServiceStub : public skerry::v1::RunService::StubInterface {
 public:
  MOCK_METHOD(grpc::Status, SubmitRun,
              (grpc::ClientContext*, const skerry::v1::SubmitRunRequest&,
               skerry::v1::SubmitRunResponse*),
              (override));
  MOCK_METHOD(grpc::Status, ListRuns,
              (grpc::ClientContext*, const skerry::v1::ListRunsRequest&,
               skerry::v1::ListRunsResponse*),
              (override));
  MOCK_METHOD(grpc::Status, GetRun,
              (grpc::ClientContext*, const skerry::v1::RunRef&,
               skerry::v1::GetRunResponse*),
              (override));
  MOCK_METHOD(grpc::Status, PauseRun,
              (grpc::ClientContext*, const skerry::v1::RunRef&,
               skerry::v1::RunSummary*),
              (override));
  MOCK_METHOD(grpc::Status, ResumeRun,
              (grpc::ClientContext*, const skerry::v1::RunRef&,
               skerry::v1::RunSummary*),
              (override));
  MOCK_METHOD(grpc::Status, StopRun,
              (grpc::ClientContext*, const skerry::v1::RunRef&,
               skerry::v1::RunSummary*),
              (override));
  MOCK_METHOD(grpc::Status, GetChampion,
              (grpc::ClientContext*, const skerry::v1::RunRef&,
               skerry::v1::GetChampionResponse*),
              (override));
  MOCK_METHOD(grpc::Status, GetHistory,
              (grpc::ClientContext*, const skerry::v1::GetHistoryRequest&,
               skerry::v1::GetHistoryResponse*),
              (override));
  MOCK_METHOD(grpc::Status, GetDigest,
              (grpc::ClientContext*, const skerry::v1::RunRef&,
               skerry::v1::DigestResponse*),
              (override));
  MOCK_METHOD(grpc::Status, SetPriority,
              (grpc::ClientContext*, const skerry::v1::SetPriorityRequest&,
               skerry::v1::RunSummary*),
              (override));
  MOCK_METHOD(grpc::Status, ForkRun,
              (grpc::ClientContext*, const skerry::v1::ForkRunRequest&,
               skerry::v1::SubmitRunResponse*),
              (override));
  MOCK_METHOD(grpc::Status, DeleteRun,
              (grpc::ClientContext*, const skerry::v1::RunRef&,
               skerry::v1::DeleteRunResponse*),
              (override));
  // The sync WatchRun() wraps this private virtual; the reader is owned by
  // the caller.
  MOCK_METHOD(grpc::ClientReaderInterface<skerry::v1::RunSummary>*, WatchRunRaw,
              (grpc::ClientContext*, const skerry::v1::WatchRunRequest&),
              (override));
  // The sync FollowRun() wraps this; the stream is owned by the caller.
  MOCK_METHOD((grpc::ClientReaderWriterInterface<skerry::v1::FollowRunRequest,
                                                 skerry::v1::RunSummary>*),
              FollowRunRaw, (grpc::ClientContext*), (override));

 private:
  SKERRY_NO_ASYNC_UNARY(SubmitRun, SubmitRunRequest, SubmitRunResponse)
  SKERRY_NO_ASYNC_UNARY(ListRuns, ListRunsRequest, ListRunsResponse)
  SKERRY_NO_ASYNC_UNARY(GetRun, RunRef, GetRunResponse)
  SKERRY_NO_ASYNC_UNARY(PauseRun, RunRef, RunSummary)
  SKERRY_NO_ASYNC_UNARY(ResumeRun, RunRef, RunSummary)
  SKERRY_NO_ASYNC_UNARY(StopRun, RunRef, RunSummary)
  SKERRY_NO_ASYNC_UNARY(GetChampion, RunRef, GetChampionResponse)
  SKERRY_NO_ASYNC_UNARY(GetHistory, GetHistoryRequest, GetHistoryResponse)
  SKERRY_NO_ASYNC_UNARY(GetDigest, RunRef, DigestResponse)
  SKERRY_NO_ASYNC_UNARY(SetPriority, SetPriorityRequest, RunSummary)
  SKERRY_NO_ASYNC_UNARY(ForkRun, ForkRunRequest, SubmitRunResponse)
  SKERRY_NO_ASYNC_UNARY(DeleteRun, RunRef, DeleteRunResponse)
  grpc::ClientAsyncReaderInterface<skerry::v1::RunSummary>* AsyncWatchRunRaw(
      grpc::ClientContext*, const skerry::v1::WatchRunRequest&,
      grpc::CompletionQueue*, void*) override {
    return nullptr;
  }
  grpc::ClientAsyncReaderInterface<skerry::v1::RunSummary>*
  PrepareAsyncWatchRunRaw(grpc::ClientContext*,
                          const skerry::v1::WatchRunRequest&,
                          grpc::CompletionQueue*) override {
    return nullptr;
  }
  grpc::ClientAsyncReaderWriterInterface<skerry::v1::FollowRunRequest,
                                         skerry::v1::RunSummary>*
  AsyncFollowRunRaw(grpc::ClientContext*, grpc::CompletionQueue*,
                    void*) override {
    return nullptr;
  }
  grpc::ClientAsyncReaderWriterInterface<skerry::v1::FollowRunRequest,
                                         skerry::v1::RunSummary>*
  PrepareAsyncFollowRunRaw(grpc::ClientContext*,
                           grpc::CompletionQueue*) override {
    return nullptr;
  }
};

#undef SKERRY_NO_ASYNC_UNARY

}  // namespace skerry::cli::testing

#endif  // SKERRY_TESTS_UNIT_CLI_MOCK_RUN_SERVICE_H_
