/* The addresses of the pages and of the API the board uses; every id and name is percent-encoded. */

export const incidentPath = (id) => `/v1/incidents/${encodeURIComponent(id)}`;
export const incidentPagePath = (id) => `/incidents/${encodeURIComponent(id)}`;
export const componentPath = (unit, component) => `/units/${encodeURIComponent(unit)}/components/${encodeURIComponent(component)}`;
export const apiComponentPath = (unit, component) => `/v1/units/${encodeURIComponent(unit)}/components/${encodeURIComponent(component)}`;
