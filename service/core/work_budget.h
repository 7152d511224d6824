// WorkBudget: a cap on the CPU time one search inside the core may spend.
//
// A few searches (the hold-out planner, the gate's REJECT plan) need
// thousands of bound evaluations when an expected rate lies within a hair of
// its target; each evaluation is bounded, but their number grows as the gap
// shrinks. Such a search carries a WorkBudget and gives up (reporting that it
// did) once the calling thread has spent the budget's CPU time on it. CPU
// time, not wall time, so a loaded machine does not change the answers.
#ifndef RISKBOUND_SERVICE_CORE_WORK_BUDGET_H_
#define RISKBOUND_SERVICE_CORE_WORK_BUDGET_H_

#include <time.h>

namespace riskbound::core {

// Budgets are multiplied by this. 1 in every build but the sanitizer build
// (CMake RISKBOUND_SANITIZE, which sets 4): AddressSanitizer and
// UndefinedBehaviorSanitizer make the math two to three times slower, and
// a budget that ran out there would change answers the tests check.
#ifndef RISKBOUND_WORK_BUDGET_SCALE
#define RISKBOUND_WORK_BUDGET_SCALE 1.0
#endif

class WorkBudget {
 public:
  // A budget of `seconds` of the calling thread's CPU time, from now.
  explicit WorkBudget(double seconds)
      : end_(ThreadCpuSeconds() + seconds * (RISKBOUND_WORK_BUDGET_SCALE)) {}

  // Spent
  // True once the calling thread has used the budget (sticky). Costs one
  // clock read (tens of nanoseconds). Not thread-safe: one search, one thread.
  bool Spent() {
    if (!spent_ && ThreadCpuSeconds() > end_) spent_ = true;
    return spent_;
  }
  bool spent() const { return spent_; }

 private:
  static double ThreadCpuSeconds() {
    timespec ts;
    clock_gettime(CLOCK_THREAD_CPUTIME_ID, &ts);
    return static_cast<double>(ts.tv_sec) + 1e-9 * static_cast<double>(ts.tv_nsec);
  }

  double end_;
  bool spent_ = false;
};

}  // namespace riskbound::core

#endif  // RISKBOUND_SERVICE_CORE_WORK_BUDGET_H_
