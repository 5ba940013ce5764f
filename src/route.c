/* Route helpers: defaults and appending legs and waypoints.
 * SPDX-License-Identifier: MIT */
#include <string.h>
#include "internal.h"

void veer__route_init(veer_route *r, double x, double y, double yaw) {
    memset(r, 0, sizeof *r);
    r->start_x = x;
    r->start_y = y;
    r->start_yaw = yaw;
}

void veer__route_set_head(veer_route *r, const veer__route_view *v) {
    r->start_x = v->start_x, r->start_y = v->start_y, r->start_yaw = v->start_yaw;
    r->has_start_steer = v->has_start_steer;
    memcpy(r->start_steer, v->start_steer, sizeof r->start_steer);
    r->has_start_twist = v->has_start_twist;
    memcpy(r->start_twist, v->start_twist, sizeof r->start_twist);
    r->leg_count = v->leg_count, r->waypoint_count = v->waypoint_count;
}

veer_route veer_default_route(double x, double y, double yaw) {
    veer_route r;
    veer__route_init(&r, x, y, yaw);
    return r;
}

veer_leg veer_default_leg(veer_leg_kind kind) {
    veer_leg leg;
    memset(&leg, 0, sizeof leg);
    leg.kind = kind;
    leg.heading = VEER_HEADING_HOLD;
    leg.corner_tolerance = 0.25;
    return leg;
}

veer_waypoint veer_default_waypoint(double x, double y) {
    veer_waypoint wp;
    memset(&wp, 0, sizeof wp);
    wp.x = x;
    wp.y = y;
    return wp;
}

veer_status veer_route_add_leg(veer_route *route, const veer_leg *leg) {
    if (!route || !leg) return VEER_ERR_NULL;
    if (route->leg_count < 0) return VEER_ERR_VALUE;
    if (route->leg_count >= VEER_MAX_LEGS) return VEER_ERR_CAPACITY;
    route->legs[route->leg_count] = *leg;
    route->legs[route->leg_count].waypoint_count = 0;
    route->leg_count++;
    return VEER_OK;
}

veer_status veer_route_add_waypoint(veer_route *route, const veer_waypoint *wp) {
    if (!route || !wp) return VEER_ERR_NULL;
    if (route->leg_count <= 0 || route->leg_count > VEER_MAX_LEGS) return VEER_ERR_STATE;
    if (route->legs[route->leg_count - 1].kind != VEER_LEG_TRAVEL) return VEER_ERR_STATE;
    if (route->waypoint_count < 0) return VEER_ERR_VALUE;
    if (route->waypoint_count >= VEER_MAX_WAYPOINTS) return VEER_ERR_CAPACITY;
    route->waypoints[route->waypoint_count++] = *wp;
    route->legs[route->leg_count - 1].waypoint_count++;
    return VEER_OK;
}
