import { openDatabase } from '../../server/db/data-source';
import { issueToken } from '../../server/tokens/tokens.service';
void (async () => {
const ds = await openDatabase('postgres://chronolevel@127.0.0.1:55432/load');
const [{ id: opId }] = await ds.query("SELECT id FROM app_user WHERE email = 'person1@scaled-copy.invalid'");
const [{ id: coordId }] = await ds.query("SELECT id FROM app_user WHERE role = 'coordinator' ORDER BY email LIMIT 1");
const [{ id: campId }] = await ds.query("SELECT c.id FROM campaign c JOIN app_user u ON u.institute_id = c.institute_id WHERE u.id = $1 LIMIT 1", [opId]);
console.log(JSON.stringify({ op: (await issueToken(ds, opId, 'b', null)).secret, coord: (await issueToken(ds, coordId, 'b', null)).secret, camp: campId }));
await ds.destroy();
})();
