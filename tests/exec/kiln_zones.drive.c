/*
 * Drives the folder fixtures/forms/kiln_zones: float fields of typedef'd structs reached
 * through an array, a nested struct, a typedef'd pointer with pointer arithmetic, and a
 * state whose type is declared in a header outside the scan (defined here as the vendor's
 * build would: a float).
 *
 * Expected by hand (all float, no dead band):
 *   kiln_zone_sample   kiln_zones[zone].wall.smooth  alpha 1/8   (y*7 + u)/8: 1000/8 = 125
 *   kiln_door_tick     (kiln_door + 0)->smooth       alpha 1/4   y += (u - y)/4: 250
 *   kiln_door_tick     (kiln_door + 1)->smooth       alpha 1/4   the second call site
 *   kiln_crown_sample  kiln_crown_c                  alpha 1/16  (y*15 + u)/16: 62.5
 *   kiln_vent_sample   kiln_vent_filter(vent)->smooth  alpha 1/2  0.5f * 1000 = 500
 */
typedef float vendor_real_t;
#include "../../fixtures/forms/kiln_zones/kiln_zones.c"

#include "drive.h"

vendor_real_t kiln_crown_c;

static void zone_reset(double y0) { kiln_zones[2].wall.smooth = (float)y0; }
static double zone_step(double u)
{
    kiln_zone_sample(2, (float)u);
    return kiln_zones[2].wall.smooth;
}
static void door_reset(double y0)
{
    kiln_door[0].smooth = (float)y0;
    kiln_door[1].smooth = (float)y0;
}
/* kiln_door_tick updates both sides with their own inputs; each case drives one side and
 * reads that side. */
static double left_step(double u)
{
    kiln_door_tick((float)u, kiln_door[1].smooth);
    return kiln_door[0].smooth;
}
static double right_step(double u)
{
    kiln_door_tick(kiln_door[0].smooth, (float)u);
    return kiln_door[1].smooth;
}
static kiln_filter_t vents[3];
kiln_filter_t *kiln_vent_filter(int vent) { return &vents[vent]; }
static void vent_reset(double y0) { vents[1].smooth = (float)y0; }
static double vent_step(double u)
{
    kiln_vent_sample(1, (float)u);
    return vents[1].smooth;
}
static void crown_reset(double y0) { kiln_crown_c = (float)y0; }
static double crown_step(double u)
{
    kiln_crown_sample((float)u);
    return kiln_crown_c;
}

const struct drive_case DRIVE_CASES[] = {
    {.function = "kiln_zone_sample", .state = "kiln_zones[zone].wall.smooth", .integer = 0,
     .scale = 1000.0, .reset = zone_reset, .step = zone_step, .signed_range = 1,
     .file = "kiln_zones.c"},
    {.function = "kiln_door_tick", .state = "(kiln_door + 0)->smooth", .integer = 0,
     .scale = 1000.0, .reset = door_reset, .step = left_step, .signed_range = 1,
     .file = "kiln_zones.c"},
    {.function = "kiln_door_tick", .state = "(kiln_door + 1)->smooth", .integer = 0,
     .scale = 1000.0, .reset = door_reset, .step = right_step, .signed_range = 1,
     .file = "kiln_zones.c"},
    {.function = "kiln_crown_sample", .state = "kiln_crown_c", .integer = 0, .scale = 1000.0,
     .reset = crown_reset, .step = crown_step, .signed_range = 1, .file = "kiln_zones.c"},
    {.function = "kiln_vent_sample", .state = "kiln_vent_filter(vent)->smooth", .integer = 0,
     .scale = 1000.0, .reset = vent_reset, .step = vent_step, .signed_range = 1,
     .file = "kiln_zones.c"},
    {0},
};
