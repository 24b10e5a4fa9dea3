/**
 * An answer already written as JSON text (built by PostgreSQL for the campaign list), sent as it is: the route layer
 * neither parses nor serialises it again. The text must match the route's response schema; a test compares such
 * answers with the same data read through the entities (tests/api/campaign-list-parity.test.ts).
 */
export class JsonText {
  constructor(readonly text: string) {}
}
