// The invented demo scenario: institutes and people of a fictitious country. None of them exists.
export const demoInstitutes = [
  { code: 'SCL', name: 'Saltmarsh Coastal Laboratory for Time and Frequency', city: 'Port Elvenby', kind: 'laboratory' },
  { code: 'HMO', name: 'Highridge Mountain Observatory, Clock Group', city: 'Kestrel Pass', kind: 'laboratory' },
  { code: 'NGCO', name: 'National Geopotential Coordination Office', city: 'Calderon', kind: 'coordinating' },
  { code: 'IAB', name: 'Independent Audit Bureau for Measurement', city: 'Calderon', kind: 'audit' },
] as const;

export const demoPeople = [
  { email: 'ines.varga@saltmarsh-lab.invalid', displayName: 'Ines Varga', instituteCode: 'SCL', role: 'operator' },
  { email: 'tomas.reyland@saltmarsh-lab.invalid', displayName: 'Tomas Reyland', instituteCode: 'SCL', role: 'operator' },
  { email: 'mira.ostrowe@highridge-obs.invalid', displayName: 'Mira Ostrowe', instituteCode: 'HMO', role: 'operator' },
  { email: 'ansel.brandt@geopotential-office.invalid', displayName: 'Ansel Brandt', instituteCode: 'NGCO', role: 'coordinator' },
  { email: 'petra.lind@audit-bureau.invalid', displayName: 'Petra Lind', instituteCode: 'IAB', role: 'auditor' },
  { email: 'yusra.holm@geopotential-office.invalid', displayName: 'Yusra Holm', instituteCode: 'NGCO', role: 'admin' },
] as const;

export type DemoPerson = (typeof demoPeople)[number];
