import { createBrowserRouter } from 'react-router';
import { Layout } from './layout';
import { featureRoutes } from './routes';
import { VerifyPage } from '../pages/verify/verify-page';
import { guardIdParams } from './route-guards';

// The verification page is public; a signed-in visitor sees it inside the usual frame.
export const router = createBrowserRouter([
  { path: '/verify', element: <Layout publicContent={<VerifyPage />}><VerifyPage signedIn /></Layout> },
  { path: '/', element: <Layout />, children: featureRoutes.map(guardIdParams) },
]);
