/*
 * Which view this page is (the server writes it into the body: board, incident or component) and what its address
 * names: the unit and component of a component page, the incident id of an incident page.
 */
/* global document, location */

export const view = ['component', 'incident'].includes(document.body.dataset.view) ? document.body.dataset.view : 'board';

export const page = (() => {
  const match = /^\/units\/([^/]+)\/components\/([^/]+)\/?$/.exec(location.pathname);
  const incident = /^\/incidents\/(.+)$/.exec(location.pathname);
  return {
    unit: match ? decodeURIComponent(match[1]) : '',
    component: match ? decodeURIComponent(match[2]) : '',
    incidentId: incident ? decodeURIComponent(incident[1]) : '',
  };
})();
