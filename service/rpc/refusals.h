// The checks the RPC layer makes itself, the ones only the wire can fail:
// size caps (core/limits.h) on repeated and free-text fields, applied BEFORE
// any element is copied, so that a few bytes of hostile input cannot cost
// gigabytes of memory or minutes of CPU; and an enum number this server does
// not know where the core takes "unset" as its default (delta_spread), so
// that it is never silently read as unset. Everything else is the core's to
// check and to decide.
//
// A list over its cap is not copied: the conversion records one violation
// naming it ("listed.families: at most 64 entries, got 1300000") and the
// paths whose core findings would be meaningless without it (the list
// itself, or the struct it sits in). The handler then asks the core to
// validate the rest of the request and answers with both (WithRefusals), so
// one answer still names every bad field. A text over its cap (an id) is
// copied cut to the cap.
#ifndef RISKBOUND_SERVICE_RPC_REFUSALS_H_
#define RISKBOUND_SERVICE_RPC_REFUSALS_H_

#include <cstddef>
#include <string>
#include <vector>

#include "absl/status/status.h"
#include "absl/strings/string_view.h"
#include "service/core/field_violation.h"

namespace riskbound::rpc {

// What a conversion refused before copying.
struct Refusals {
  // One violation per field over its cap, by its API path.
  std::vector<core::FieldViolation> violations;
  // Paths whose core findings are left out of the answer: at or under one
  // of these.
  std::vector<std::string> skipped;
  // Paths whose core findings are left out only when they name exactly this
  // path (a finding about the whole of something the refused list decides).
  std::vector<std::string> skipped_exact;

  bool empty() const { return violations.empty(); }

  // RefuseList
  // True when `size` <= `cap`. Else records "at most <cap> entries, got
  // <size>" on `field`, skips `skip` (`field` when empty) and returns false.
  bool RefuseList(const std::string& field, std::size_t size, std::size_t cap,
                  const std::string& skip = "");

  // RefuseText
  // True when `text` has at most `cap` bytes. Else records "at most <cap>
  // bytes, got <size>" on `field`, skips `field` and returns false.
  bool RefuseText(const std::string& field, absl::string_view text, std::size_t cap);
};

// A core request converted from the wire, with what the conversion refused.
template <class T>
struct Converted {
  T request;
  Refusals refusals;
};

// WithRefusals
// INVALID_ARGUMENT listing the refusals first, then the violations of
// `core_status` (made by core::InvalidFields) that are not at or under a
// skipped path (or exactly at a skipped_exact one), the core's count of
// unlisted ones kept. An OK `core_status`
// gives the refusals alone; a status that carries no field violations
// (CANCELLED, ...) is returned as it is. REQUIRES: !refusals.empty().
// Linear in the number of violations and skipped paths. Thread-safe.
absl::Status WithRefusals(const Refusals& refusals, const absl::Status& core_status);

}  // namespace riskbound::rpc

#endif  // RISKBOUND_SERVICE_RPC_REFUSALS_H_
