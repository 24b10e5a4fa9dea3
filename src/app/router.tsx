import { createBrowserRouter } from 'react-router';
import { Layout } from './layout';
import { featureRoutes } from './routes';

export const router = createBrowserRouter([{ path: '/', element: <Layout />, children: featureRoutes }]);
