// The declaration of every campaign key, gathered from each module.
#pragma once
#include "core/config.hpp"

namespace spinflip::campaign {

/// Every key a campaign file may hold: the campaign's own keys plus each
/// module's (cosmology, cone, sources, scenarios, slices, stats, ...).
const core::Schema& campaign_schema();

/// The campaign's own keys ([campaign], [parameters.*], [[designs]]).
void declare_keys(core::Schema& schema);

}  // namespace spinflip::campaign
