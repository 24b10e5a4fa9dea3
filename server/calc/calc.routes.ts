import {
  budgetRequestSchema, budgetResponseSchema,
  geodesicRequestSchema, geodesicResponseSchema, normalGravityRequestSchema, normalGravityResponseSchema, redshiftRequestSchema,
  redshiftResponseSchema, stabilityRequestSchema, stabilityResponseSchema, tideRequestSchema, tideResponseSchema,
  transformRequestSchema, transformResponseSchema,
} from '../../shared/calc';
import { route } from '../http/route';
import { budget, coordinateTransform, geodesic, normalGravity, redshift, stability, tide } from './calc.service';

// Calculator routes: stateless conversions for every role (permission calc:use).
export const calcRoutes = [
  route({
    method: 'post', path: '/api/v1/calc/redshift', summary: 'Frequency ratio → fractional offset, potential and height difference', tag: 'calculator',
    permission: 'calc:use', body: redshiftRequestSchema, response: redshiftResponseSchema,
    handler: async ({ body }) => redshift(body),
  }),
  route({
    method: 'post', path: '/api/v1/calc/stability', summary: 'Allan, modified Allan and time deviation of a frequency or phase series', tag: 'calculator',
    permission: 'calc:use', body: stabilityRequestSchema, response: stabilityResponseSchema,
    handler: async ({ body }) => stability(body),
  }),
  route({
    method: 'post', path: '/api/v1/calc/normal-gravity', summary: 'GRS80 normal gravity and mean normal gravity to a height', tag: 'calculator',
    permission: 'calc:use', body: normalGravityRequestSchema, response: normalGravityResponseSchema,
    handler: async ({ body }) => normalGravity(body),
  }),
  route({
    method: 'post', path: '/api/v1/calc/geodesic', summary: 'Geodesic distance and azimuths on GRS80', tag: 'calculator',
    permission: 'calc:use', body: geodesicRequestSchema, response: geodesicResponseSchema,
    handler: async ({ body }) => geodesic(body),
  }),
  route({
    method: 'post', path: '/api/v1/calc/transform', summary: 'Coordinate transformation between reference systems', tag: 'calculator',
    permission: 'calc:use', body: transformRequestSchema, response: transformResponseSchema,
    handler: async ({ body }) => coordinateTransform(body),
  }),
  route({
    method: 'post', path: '/api/v1/calc/tide', summary: 'Solid-Earth tidal potential at a clock for given epochs', tag: 'calculator',
    permission: 'calc:use', body: tideRequestSchema, response: tideResponseSchema,
    handler: async ({ body }) => tide(body),
  }),
  route({
    method: 'post', path: '/api/v1/calc/budget', summary: 'GUM budget: combined uncertainty, ν_eff and k = t_p(ν_eff)', tag: 'calculator',
    permission: 'calc:use', body: budgetRequestSchema, response: budgetResponseSchema,
    handler: async ({ body }) => budget(body),
  }),
];
