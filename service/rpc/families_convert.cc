#include "service/rpc/families_convert.h"

#include <string>

#include "service/rpc/enums.h"

namespace riskbound::rpc {

void FamilyDescriptionToProto(const core::FamilySpec& spec, v1::FamilyDescription* out) {
  out->set_family(FamilyToProto(spec.family));
  out->set_family_name(std::string(spec.family_name));
  out->set_title(std::string(spec.title));
  out->set_source(std::string(spec.source));
  out->set_assumptions(std::string(spec.assumptions));
  out->set_evidence_needed(std::string(spec.evidence_needed));
}

v1::ListFamiliesResponse ListFamiliesResponseToProto(absl::Span<const core::FamilySpec> families) {
  v1::ListFamiliesResponse out;
  for (const core::FamilySpec& spec : families) {
    FamilyDescriptionToProto(spec, out.add_families());
  }
  out.set_engine_version(RISKBOUND_ENGINE_VERSION);
  return out;
}

}  // namespace riskbound::rpc
