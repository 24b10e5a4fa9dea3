import { createBrowserRouter } from 'react-router';
import { Layout } from './layout';
import { featureRoutes } from './routes';
import { VerifyPage } from '../pages/verify/verify-page';

export const router = createBrowserRouter([{ path: '/verify', element: <VerifyPage /> }, { path: '/', element: <Layout />, children: featureRoutes }]);
