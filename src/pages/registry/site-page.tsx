import { Link, useParams } from 'react-router';
import type { Site } from '../../../shared/registry';
import { useMe } from '../../api/account';
import { useClocks, useLinks, useSite, useSiteClocks } from '../../api/registry';
import { EmptyState, Panel } from '../../components/ui';
import { describeError } from '../../lib/api-client';
import { canChangeInstituteRecord, EditSitePanel } from './registry-forms';
import { Facts, fixed } from './registry-ui';
import { SiteTiePanel } from './site-tie-panel';
import { StandardUncertaintyCaution } from '../../components/cautions';

export function SitePage() {
  const { id = '' } = useParams();
  const me = useMe();
  const site = useSite(id);
  const clocks = useClocks({ page: 1, pageSize: 50, order: 'asc', q: '', siteId: id });
  const visits = useSiteClocks(id);
  const links = useLinks({ page: 1, pageSize: 50, order: 'asc', q: '', siteId: id });
  if (site.isPending) return <p className="text-ink-500">Loading…</p>;
  if (site.isError) return <EmptyState title="This site could not be loaded">{describeError(site.error)}</EmptyState>;
  const s = site.data;
  const entered = s.entered.coordinates;
  return (
    <>
      <header>
        <p className="text-sm text-ink-500"><Link to="/sites">Sites</Link> / {s.institute.code}</p>
        <h1 data-testid="site-title">{s.name}</h1>
        <p className="text-sm text-ink-600">{s.referencePoint}</p>
      </header>
      <div className="grid gap-5 md:grid-cols-2">
        <Panel title="As entered">
          <Facts items={[
            ['Coordinate system', <span key="c">{s.entered.crsLabel} <code className="text-xs">{s.entered.crs}</code></span>],
            ...enteredAxes(s.entered.crsKind, entered).map(([axis, value], i): [string, React.ReactNode] => [axis, <code key={axis} data-testid={i === 0 ? 'entered-coordinates' : undefined}>{value}</code>]),
          ]} />
        </Panel>
        <Panel title="Converted: GRS80">
          <Facts items={[
            ['Latitude φ', <span key="la" data-testid="grs80-lat">{fixed(s.grs80.latitudeDeg, 9)}°</span>],
            ['Longitude λ', <span key="lo" data-testid="grs80-lon">{fixed(s.grs80.longitudeDeg, 9)}°</span>],
            ['Ellipsoidal height h', `${fixed(s.grs80.ellipsoidalHeightM, 4)} m ± ${fixed(s.grs80.ellipsoidalHeightUncertaintyM, 4)} m (k = 1)`],
            ['Crust system of h', <span key="crust" data-testid="crust-system">{s.ellipsoidalCrustSystem ?? 'not stated — comparisons need it'}</span>],
            ['Geocentric X', `${fixed(s.grs80.xM, 4)} m`],
            ['Geocentric Y', `${fixed(s.grs80.yM, 4)} m`],
            ['Geocentric Z', `${fixed(s.grs80.zM, 4)} m`],
          ]} />
          <ul className="mt-3 list-disc pl-5 text-xs text-ink-500">{s.assumptions.map((a) => <li key={a}>{a}</li>)}</ul>
        </Panel>
        <Panel title="Heights">
          <Facts items={[
            ['Quasigeoid height ζ', `${fixed(s.quasigeoid.heightM, 4)} m ± ${fixed(s.quasigeoid.uncertaintyM, 4)} m (k = 1)`],
            ['Tide system of ζ', <span key="zts" data-testid="zeta-tide-system">{s.quasigeoid.tideSystem ?? 'not stated — comparisons need it'}</span>],
            ['ζ from', s.quasigeoid.source === 'grid' ? `bilinear interpolation in “${s.quasigeoid.gridName ?? s.quasigeoid.gridId}”` : 'entered by the lab'],
            ['Normal height H = h − ζ', <span key="h" data-testid="normal-height">{fixed(s.normalHeight.valueM, 4)} m ± {fixed(s.normalHeight.uncertaintyM, 4)} m (k = 1)</span>],
            ['Uncertainty', s.normalHeight.formula],
          ]} />
        </Panel>
        <SiteTiePanel site={s} canEdit={canChangeInstituteRecord(me.data, s.institute.id)} />
      </div>
      {canChangeInstituteRecord(me.data, s.institute.id) && <EditSitePanel site={s} />}
      <Panel title="Clocks registered here (home site)">
        <ul className="text-sm">{clocks.data?.items.map((c) => <li key={c.id}><Link to={`/clocks/${c.id}`}>{c.name}</Link> · {c.speciesLabel}</li>)}</ul>
        {clocks.data?.items.length === 0 && <p className="text-sm text-ink-500">None yet.</p>}
      </Panel>
      <Panel title="Clocks that stood here">
        <table className="min-w-full text-sm" data-testid="site-clock-visits">
          <thead className="text-left text-ink-500"><tr><th className="py-1">Clock</th><th>Arrived (UTC)</th><th>Departed (UTC)</th><th>Note</th></tr></thead>
          <tbody>
            {visits.data?.map((v, i) => (
              <tr key={`${v.clock.id}-${i}`} className="border-t border-paper-200">
                <td className="py-1.5"><Link to={`/clocks/${v.clock.id}`}>{v.clock.name}</Link> <span className="text-xs text-ink-500">{v.clock.mobility}</span></td>
                <td className="font-mono">{v.arrivedAt ? v.arrivedAt.slice(0, 16).replace('T', ' ') : 'always (stationary)'}</td>
                <td className="font-mono">{v.arrivedAt ? (v.departedAt ? v.departedAt.slice(0, 16).replace('T', ' ') : 'still there') : '—'}</td>
                <td className="text-ink-600">{v.note}</td>
              </tr>
            ))}
          </tbody>
        </table>
        {visits.data?.length === 0 && <p className="text-sm text-ink-500">No clock has stood here.</p>}
      </Panel>
      <Panel title="Fibre links">
        <ul className="text-sm">{links.data?.items.map((l) => <li key={l.id}><Link to={`/links/${l.id}`}>{l.name}</Link> · {l.siteA.name} – {l.siteB.name}</li>)}</ul>
        {links.data?.items.length === 0 && <p className="text-sm text-ink-500">None yet.</p>}
      </Panel>
      <StandardUncertaintyCaution />
    </>
  );
}

/** Axis names and units of the entered coordinates, in the order proj4 takes them. */
function enteredAxes(kind: Site['entered']['crsKind'], c: number[]): [string, string][] {
  const names: [string, string][] = kind === 'geographic2D' || kind === 'geographic3D'
    ? [['Longitude λ', '°'], ['Latitude φ', '°'], ['Ellipsoidal height h', ' m']]
    : kind === 'projected' ? [['Easting E', ' m'], ['Northing N', ' m'], ['Ellipsoidal height h', ' m']]
      : kind === 'geocentric' ? [['Geocentric X', ' m'], ['Geocentric Y', ' m'], ['Geocentric Z', ' m']]
        : [];
  return c.map((v, i) => (names[i] ? [names[i][0], `${v}${names[i][1]}`] : [`Value ${i + 1}`, String(v)]));
}
