#include "service/rpc/call_pool.h"

#include <utility>

namespace riskbound::rpc {

CallPool::CallPool(int threads, int max_pending) : max_pending_(max_pending) {
  threads_.reserve(threads);
  for (int i = 0; i < threads; ++i) threads_.emplace_back([this] { Run(); });
}

CallPool::~CallPool() {
  {
    absl::MutexLock lock(&mu_);
    admitting_ = false;
    exiting_ = true;
  }
  for (std::thread& t : threads_) t.join();
}

CallPool::Admission CallPool::TrySubmit(std::function<void()> work) {
  absl::MutexLock lock(&mu_);
  if (!admitting_) return Admission::kClosed;
  if (pending_ >= max_pending_) return Admission::kFull;
  ++pending_;
  queue_.push_back({std::move(work), true});
  return Admission::kAdmitted;
}

CallPool::Admission CallPool::TryReserve() {
  absl::MutexLock lock(&mu_);
  if (!admitting_) return Admission::kClosed;
  if (pending_ >= max_pending_) return Admission::kFull;
  ++pending_;
  return Admission::kAdmitted;
}

void CallPool::SubmitReserved(std::function<void()> work) {
  absl::MutexLock lock(&mu_);
  queue_.push_back({std::move(work), false});
}

void CallPool::Release() {
  absl::MutexLock lock(&mu_);
  --pending_;
}

void CallPool::StopAdmitting() {
  absl::MutexLock lock(&mu_);
  admitting_ = false;
}

bool CallPool::WaitIdle(absl::Duration timeout) {
  absl::MutexLock lock(&mu_);
  auto idle = [this]() ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_) { return pending_ == 0; };
  return mu_.AwaitWithTimeout(absl::Condition(&idle), timeout);
}

int CallPool::pending() const {
  absl::MutexLock lock(&mu_);
  return pending_;
}

void CallPool::Run() {
  while (true) {
    Queued item;
    {
      absl::MutexLock lock(&mu_);
      auto ready = [this]() ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_) {
        return !queue_.empty() || exiting_;
      };
      mu_.Await(absl::Condition(&ready));
      if (queue_.empty()) return;  // exiting with nothing left to run
      item = std::move(queue_.front());
      queue_.pop_front();
    }
    item.work();
    if (!item.ends_admission) continue;
    absl::MutexLock lock(&mu_);
    --pending_;
  }
}

}  // namespace riskbound::rpc
